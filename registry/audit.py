"""Ties git (registry/git.py) to the drift analysis (registry/history.py) for the commands.

``check`` calls :func:`add_history`; ``history``, ``freeze`` and ``verify`` use
:func:`read_history` and :func:`find_spec`; a summary renderer can call
:func:`provenance` for a spec's drift verdict, last commit and registration tag.
"""

from __future__ import annotations

import dataclasses
import os
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from datetime import date, datetime
from pathlib import Path
from typing import Any

from .checks import Finding, SpecReport, check_files
from .config import RegistryConfig
from .discovery import SpecFile, UsageError, discover, display_name
from .git import Commit, GitProblem, Repository, TagInfo, find_repository
from .history import Event, Snapshot, SnapshotStore, SpecHistory, analyze, dotted_loc, spec_events, \
    uncommitted_findings
from .registration import InvalidRegistration, parse_block, tag_version

__all__ = ["RegistryHistory", "read_history", "add_history", "HistoryStatus", "find_spec", "Provenance",
           "provenance", "registrations", "Registration", "worktree_snapshot"]


@dataclass(frozen=True)
class Registration:
    """One ``prespec/<id>/vN`` tag, with its block parsed (``fields`` empty and ``problem`` set if not)."""

    version: int
    tag: TagInfo
    fields: dict[str, str]
    problem: str | None = None


@dataclass
class RegistryHistory:
    """One repository's history, read in one pass: every spec's versions by id."""

    repo: Repository
    head: str | None
    shallow: bool
    store: SnapshotStore
    events: dict[str, list[Event]]
    head_ids: dict[str, tuple[str, str]]
    commit_dates: dict[str, datetime]
    commits: dict[str, Commit]
    _cache: dict[tuple[str, tuple[str, ...], bool], SpecHistory] = field(default_factory=dict)

    def history(self, spec_id: str, extra_locked: Sequence[str] = (), *, detail: bool = False) -> SpecHistory:
        key = (spec_id, tuple(extra_locked), detail)
        if key not in self._cache:
            self._cache[key] = analyze(spec_id, self.events.get(spec_id, []), self.store,
                                       extra_locked=extra_locked, shallow=self.shallow, detail=detail,
                                       commit_dates=self.commit_dates)
        return self._cache[key]

    def head_snapshot(self, spec_id: str) -> Snapshot | None:
        where = self.head_ids.get(spec_id)
        return self.store.get(where[1]) if where else None


def read_history(repo: Repository) -> RegistryHistory:
    """Read every spec's versions from ``repo`` with one ``git log`` and one blob reader."""
    log = repo.log()
    tree = repo.tree_files()
    wanted = {sha for entry in log for change in entry.changes for sha in (change.old_blob, change.new_blob) if sha}
    store = SnapshotStore(repo.read_blob, repo.read_blobs(sorted(wanted | set(tree.values()))))
    commits = {entry.commit.sha: entry.commit for entry in log}
    head_ids: dict[str, tuple[str, str]] = {}
    for path, blob in tree.items():
        spec_id = store.get(blob).id
        if spec_id and spec_id not in head_ids:
            head_ids[spec_id] = (path, blob)
    return RegistryHistory(repo, repo.head(), repo.is_shallow(), store, spec_events(log, store), head_ids,
                           {sha: c.committer_date for sha, c in commits.items()}, commits)


def registrations(repo: Repository, spec_id: str, tags: Sequence[TagInfo] | None = None) -> list[Registration]:
    """The registration tags of ``spec_id``, oldest version first (from ``tags`` when given:
    all of ``repo.tags("prespec")``, listed once for a whole registry)."""
    out = []
    for tag in tags if tags is not None else repo.tags(f"prespec/{spec_id}/v*"):
        version = tag_version(tag.name, spec_id)
        if version is None:
            continue
        try:
            fields = parse_block(tag.message) if tag.annotated else {}
            problem = None if tag.annotated else "a lightweight tag, not an annotated registration tag"
        except InvalidRegistration as error:
            fields, problem = {}, str(error)
        out.append(Registration(version, tag, fields, problem))
    return sorted(out, key=lambda r: r.version)


def worktree_snapshot(report: SpecReport) -> Snapshot | None:
    """The working-tree version ``check`` loaded, as a snapshot to compare with HEAD's."""
    if report.spec is None or report.document is None:
        return None
    return Snapshot.of("working-tree", report.document.data, report.spec, report.document.source)


@dataclass
class HistoryStatus:
    """Whether, and where, git history was checked (``check --json`` puts it under "history")."""

    repositories: list[dict[str, Any]] = field(default_factory=list)
    outside: list[str] = field(default_factory=list)
    problems: list[str] = field(default_factory=list)

    @property
    def checked(self) -> bool:
        return bool(self.repositories)

    def message(self) -> str | None:
        if not self.repositories and self.outside:
            return ("No git history checked: the specs are not inside a git repository, so design changes after "
                    "the start of data collection cannot be detected.")
        if self.outside:
            return f"No git history checked for {len(self.outside)} spec(s) outside any git repository."
        shallow = [r["root"] for r in self.repositories if r["shallow"]]
        if shallow:
            return "History is incomplete: shallow clone; drift cannot be ruled out."
        return None

    def to_dict(self) -> dict[str, Any]:
        return {"checked": self.checked, "repositories": self.repositories, "outside_repository": self.outside,
                "problems": self.problems, "message": self.message()}


def _with_position(finding: Finding, report: SpecReport) -> Finding:
    if report.document is None or not finding.field:
        return finding
    line, column = report.document.position(dotted_loc(finding.field))
    return dataclasses.replace(finding, line=line, column=column)


def _in_scope(path: Path, scopes: Sequence[Path]) -> bool:
    if any(part.startswith(".") for part in path.parts[-1:]):
        return False
    for scope in scopes:
        if path == scope:
            return True
        try:
            rel = path.relative_to(scope)
        except ValueError:
            continue
        if not any(part.startswith(".") for part in rel.parts):
            return True
    return False


def add_history(reports: list[SpecReport], files: list[SpecFile], paths: Sequence[str],
                config_for: Callable[[SpecFile], RegistryConfig] | None = None,
                today: date | None = None) -> HistoryStatus:
    """Add history findings to each report whose file lies in a git repository (and a report for
    each spec deleted from HEAD or the working tree within ``paths``)."""
    today = today or date.today()
    status = HistoryStatus()
    repos: dict[Path, tuple[Repository, list[tuple[SpecReport, SpecFile]]]] = {}
    by_folder: dict[Path, Repository | None] = {}
    for report, spec_file in zip(reports, files):
        folder = spec_file.path.absolute().parent
        if folder not in by_folder:
            by_folder[folder] = find_repository(folder)
        repo = by_folder[folder]
        if repo is None:
            status.outside.append(report.path)
            continue
        repos.setdefault(repo.root, (repo, []))[1].append((report, spec_file))
    scopes = [Path(os.path.abspath(p)).resolve() for p in paths]
    for scope in scopes:  # a registry folder with no spec left still has a history
        repo = find_repository(scope)
        if repo is not None and repo.root not in repos:
            repos[repo.root] = (repo, [])
    for root, (repo, members) in repos.items():
        try:
            registry = read_history(repo)
        except GitProblem as error:
            status.problems.append(f"{root}: {error}")
            continue
        status.repositories.append({"root": str(root), "head": registry.head, "shallow": registry.shallow,
                                    "commits": len(registry.commits)})
        seen: set[str] = set()
        all_tags = repo.tags("prespec")
        for report, spec_file in members:
            if report.id is None:
                continue
            seen.add(report.id)
            extra = config_for(spec_file).locked_fields if config_for else []
            history = registry.history(report.id, extra)
            report.history = history
            found = list(history.findings)
            work = worktree_snapshot(report)
            if work is not None:
                found += uncommitted_findings(registry.head_snapshot(report.id), work, today,
                                              extra_locked=extra, started_on=history.started_on)
            found += _unreachable_tags(repo, report.id, all_tags)
            report.findings += [_with_position(f, report) for f in found]
        reports += _deleted_reports(registry, seen, scopes)
    return status


def _unreachable_tags(repo: Repository, spec_id: str, tags: Sequence[TagInfo]) -> list[Finding]:
    out = []
    for registration in registrations(repo, spec_id, tags):
        if not registration.tag.reachable:
            out.append(Finding(
                "rewritten-history", "warning", "", None,
                f"the registration tag {registration.tag.name} points at commit {registration.tag.commit[:10]}, "
                "which HEAD's history no longer contains: history was rewritten (rebase, amend, reset) after the "
                "registration, so the registered version is not an ancestor of the current one"))
    return out


def _deleted_reports(registry: RegistryHistory, seen: set[str], scopes: Sequence[Path]) -> list[SpecReport]:
    out = []
    for spec_id, events in registry.events.items():
        if spec_id in seen:
            continue
        history = registry.history(spec_id)
        where = registry.head_ids.get(spec_id)
        last_path = where[0] if where else history.last_path
        if last_path is None or not _in_scope(registry.repo.root / last_path, scopes):
            continue
        report = SpecReport(path=display_name(registry.repo.root / last_path), id=spec_id)
        if where:
            message = (f"spec {spec_id!r} is in HEAD ({last_path}) but not in the working tree: it was deleted "
                       "and the deletion is not committed")
        else:
            gone = next((e for e in reversed(events) if e.new_blob is None), events[-1])
            message = (f"spec {spec_id!r} was deleted in commit {gone.commit.short} on "
                       f"{gone.commit.committer_date.isoformat(timespec='minutes')} by {gone.commit.author}; "
                       f"its last version was {last_path}. A registered experiment should be withdrawn "
                       "(status: withdrawn), not deleted, so its record stays")
        report.findings.append(Finding("deleted", "warning", "", None, message))
        report.history = history
        out.append(report)
    return out


def find_spec(target: str, paths: Sequence[str] = (".",),
              config_for: Callable[[SpecFile], RegistryConfig] | None = None) -> tuple[SpecFile, SpecReport]:
    """The spec named by a file path or by its id (searched under ``paths``), checked."""
    candidate = Path(target)
    if candidate.is_file():
        files = discover([target])
        report = check_files(files, config_for)[0]
        return files[0], report
    files = discover(list(paths))
    reports = check_files(files, config_for)
    matches = [(f, r) for f, r in zip(files, reports) if r.id == target]
    if not matches:
        where = ", ".join(paths)
        raise UsageError(f"no spec with id {target!r} under {where} (give the id of a spec, or a spec file)")
    if len(matches) > 1:
        raise UsageError(f"id {target!r} is used by {', '.join(r.path for _, r in matches)}; ids must be unique")
    return matches[0]


@dataclass(frozen=True)
class Provenance:
    """Where a spec stands in git, for summaries: verdict, last commit and registration."""

    id: str
    verdict: str  # drift, incomplete, amended, clean, uncommitted, no-repository
    repository: str | None = None
    head: str | None = None
    last_commit: str | None = None
    last_commit_date: datetime | None = None
    last_author: str | None = None
    registration_tag: str | None = None
    registration_commit: str | None = None
    registration_matches_head: bool | None = None
    findings: tuple[Finding, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        out = dataclasses.asdict(self)
        out["last_commit_date"] = self.last_commit_date.isoformat() if self.last_commit_date else None
        out["findings"] = [f.to_dict() for f in self.findings]
        return out


def provenance(spec_file: SpecFile, report: SpecReport, extra_locked: Sequence[str] = (),
               today: date | None = None) -> Provenance:
    """The drift verdict and provenance of one checked spec (never raises for git trouble)."""
    spec_id = report.id or ""
    repo = find_repository(spec_file.path.absolute())
    if repo is None or not spec_id:
        return Provenance(spec_id, "no-repository")
    try:
        registry = read_history(repo)
        history = registry.history(spec_id, extra_locked)
        found = list(history.findings)
        work = worktree_snapshot(report)
        if work is not None:
            found += uncommitted_findings(registry.head_snapshot(spec_id), work, today or date.today(),
                                          extra_locked=extra_locked, started_on=history.started_on)
        regs = [r for r in registrations(repo, spec_id) if r.fields]
    except GitProblem:
        return Provenance(spec_id, "no-repository", str(repo.root))
    verdict = history.verdict
    if verdict in ("clean", "amended") and any(f.kind == "uncommitted" for f in found):
        verdict = "uncommitted"
    last = history.last
    latest = regs[-1] if regs else None
    matches = None
    if latest is not None and registry.head_snapshot(spec_id) is not None:
        from .canonical import content_hash

        spec = registry.head_snapshot(spec_id).spec  # type: ignore[union-attr]
        matches = spec is not None and content_hash(spec) == latest.fields.get("content-sha256")
    return Provenance(spec_id, verdict, str(repo.root), registry.head, last.sha if last else None,
                      last.committer_date if last else None, last.author if last else None,
                      latest.tag.name if latest else None, latest.tag.commit if latest else None, matches,
                      tuple(found))
