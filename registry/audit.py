"""Ties git (registry/git.py) to the drift analysis (registry/history.py) for the commands.

``check`` calls :func:`add_history` (after :func:`prefetch_histories`, run in a process of its
own, when it checks files in worker processes); ``history``, ``register`` and ``verify`` use
:func:`read_history` and :func:`find_spec`; a summary renderer can call
:func:`provenance` for a spec's drift verdict, last commit and registration tag.
"""

from __future__ import annotations

import dataclasses
import os
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from datetime import date, datetime, timezone
from pathlib import Path
from typing import Any

from .checks import Finding, SpecReport, check_files, check_registry
from .config import RegistryConfig, config_loader
from .discovery import SpecFile, UsageError, discover, display_name
from .hints import id_hint
from .git import Commit, GitProblem, Repository, TagInfo, find_repository
from .history import Event, Snapshot, SnapshotStore, SpecHistory, UnreadableBlob, analyze, dotted_loc, \
    spec_events, uncommitted_findings
from .registration import InvalidRegistration, parse_block, tag_version

__all__ = ["RegistryHistory", "read_history", "prefetch_histories", "add_history", "HistoryStatus", "find_spec",
           "registrations", "Registration", "worktree_snapshot", "spec_history", "add_registration_tags"]


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
    detached: bool = False
    now: datetime = field(default_factory=lambda: datetime.now(timezone.utc))
    _cache: dict[tuple[str, tuple[str, ...], bool], SpecHistory] = field(default_factory=dict)

    def __getstate__(self) -> dict[str, Any]:
        # A history read in another process (check's history reader) comes back without that
        # process's repository handle, a live git object; the receiver attaches its own.
        return {**self.__dict__, "repo": None}

    def attach(self, repo: Repository) -> None:
        """Use ``repo`` (this process's handle of the repository this history was read from)."""
        self.repo = repo
        self.store.attach(_blob_reader(repo))

    def history(self, spec_id: str, extra_locked: Sequence[str] = (), *, detail: bool = False) -> SpecHistory:
        key = (spec_id, tuple(extra_locked), detail)
        if key not in self._cache:
            self._cache[key] = analyze(spec_id, self.events.get(spec_id, []), self.store,
                                       extra_locked=extra_locked, shallow=self.shallow, detail=detail,
                                       commit_dates=self.commit_dates, now=self.now)
        return self._cache[key]

    def unattributed(self) -> dict[str, str]:
        """Unreadable versions (blob id -> what git said) that belong to no spec prespec could name."""
        used = {blob for events in self.events.values() for e in events
                for blob in (e.old_blob, e.new_blob, *e.other_blobs) if blob}
        used |= {blob for _, blob in self.head_ids.values()}
        return {blob: why for blob, why in self.store.unreadable().items() if blob not in used}

    def head_snapshot(self, spec_id: str) -> Snapshot | None:
        where = self.head_ids.get(spec_id)
        return self.store.get(where[1]) if where else None


def read_history(repo: Repository, known_paths: dict[str, str] | None = None) -> RegistryHistory:
    """Read every spec's versions from ``repo`` with one ``git log`` and one blob reader.

    A version git cannot read (a missing or corrupt object) becomes an unreadable snapshot, named
    by the id its path holds in ``known_paths`` (repository path -> id, from the working tree) when
    nothing else names it; :class:`GitProblem` only when git cannot list the history at all.
    """
    known = known_paths or {}
    log = repo.log()
    tree = repo.tree_files()
    wanted = {sha for entry in log for change in entry.changes
              for sha in (change.old_blob, change.new_blob, *change.other_blobs) if sha}
    store = SnapshotStore(_blob_reader(repo), repo.read_blobs(sorted(wanted | set(tree.values()))))
    commits = {entry.commit.sha: entry.commit for entry in log}
    head_ids: dict[str, tuple[str, str]] = {}
    for path, blob in tree.items():
        snap = store.get(blob)
        spec_id = snap.id or (known.get(path) if snap.unreadable else None)
        if spec_id and spec_id not in head_ids:
            head_ids[spec_id] = (path, blob)
    return RegistryHistory(repo, repo.head(), repo.is_shallow(), store, spec_events(log, store, known), head_ids,
                           {sha: c.committer_date for sha, c in commits.items()}, commits, repo.detached())


def _blob_reader(repo: Repository) -> Callable[[str], bytes]:
    """One blob's bytes from ``repo``; a blob git cannot give is an :class:`UnreadableBlob`."""

    def read(sha: str) -> bytes:
        try:
            return repo.read_blob(sha)
        except GitProblem as error:
            raise UnreadableBlob(f"git in {repo.root} says: {error}") from None

    return read


def prefetch_histories(paths: Sequence[str]) -> dict[Path, RegistryHistory]:
    """:func:`read_history` of the repository of each of ``paths``, by root, for :func:`add_history`
    to use: ``check`` reads them while worker processes check the spec files. A repository whose
    history git cannot list is left out (:func:`add_history` reads it again and reports why)."""
    out: dict[Path, RegistryHistory] = {}
    for path in paths:
        try:
            repo = find_repository(Path(os.path.abspath(path)).resolve())
            if repo is not None and repo.root not in out:
                out[repo.root] = read_history(repo)
        except (GitProblem, UsageError):  # no git, an unreadable history: add_history says so
            continue
    return out


def spec_history(registry: RegistryHistory, spec_id: str, extra_locked: Sequence[str] = (), *,
                 detail: bool = False, tags: Sequence[TagInfo] | None = None) -> SpecHistory:
    """One spec's history with the registration-tag findings added (a rewritten history under a tag)."""
    history = registry.history(spec_id, extra_locked, detail=detail)
    rewritten = _unreachable_tags(registry.repo, spec_id, tags)
    return dataclasses.replace(history, findings=history.findings + rewritten) if rewritten else history


def registrations(repo: Repository | None, spec_id: str, tags: Sequence[TagInfo] | None = None) -> list[Registration]:
    """The registration tags of ``spec_id``, oldest version first (from ``tags`` when given:
    all of ``repo.tags("prespec")``, listed once for a whole registry; ``repo`` is only asked
    when they are not)."""
    if tags is None and repo is None:
        raise ValueError("registrations needs the repository or its listed tags")
    out = []
    for tag in tags if tags is not None else repo.tags(f"prespec/{spec_id}/v*"):  # type: ignore[union-attr]
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
        lines = []
        if not self.repositories and self.outside:
            lines.append("No git history checked: the specs are not inside a git repository, so design changes "
                         "after the start of data collection cannot be detected.")
        elif self.outside:
            lines.append(f"No git history checked for {len(self.outside)} spec(s) outside any git repository.")
        if any(r["shallow"] for r in self.repositories):
            lines.append("History is incomplete: shallow clone; drift cannot be ruled out.")
        for repository in self.repositories:
            if repository.get("detached"):
                lines.append(f"HEAD is detached in {repository['root']}: the history checked is the one leading to "
                             f"commit {str(repository['head'])[:10]}, not a branch's.")
        return "\n".join(lines) or None

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
                today: date | None = None, cache: Any = None,
                prefetched: dict[Path, RegistryHistory] | None = None) -> HistoryStatus:
    """Add history findings to each report whose file lies in a git repository (and a report for
    each spec deleted from HEAD or the working tree within ``paths``). ``cache`` (a
    :class:`registry.checkcache.CheckCache`) answers for a repository whose state and members are
    those of a stored run, and keeps the results of the others. ``prefetched``: histories already
    read by :func:`prefetch_histories`, by repository root."""
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
            report.ensure_document()
            _no_history(report, spec_file, config_for, today)
            continue
        repos.setdefault(repo.root, (repo, []))[1].append((report, spec_file))
    scopes = [Path(os.path.abspath(p)).resolve() for p in paths]
    for scope in scopes:  # a registry folder with no spec left still has a history
        repo = find_repository(scope)
        if repo is not None and repo.root not in repos:
            repos[repo.root] = (repo, [])
    for root, (repo, members) in repos.items():
        locked = (lambda f: config_for(f).locked_fields) if config_for else (lambda f: [])
        key = cache.history_key(repo, members, scopes, locked, today) if cache is not None else None
        stored = cache.history_get(repo, key, len(members)) if key is not None else None
        if stored is not None:
            for (report, _), (found, history) in zip(members, stored["members"]):
                report.findings += found
                report.history = history
            status.repositories += stored["repositories"]
            status.problems += stored["problems"]
            reports += stored["extra"]
            continue
        before = [len(report.findings) for report, _ in members]
        counts = (len(status.repositories), len(status.problems), len(reports))
        _repository_history(repo, members, scopes, config_for, today, status, reports,
                            (prefetched or {}).get(root))
        if key is not None and len(status.repositories) > counts[0]:
            cache.history_put(repo, key, [(report.findings[n:], report.history)
                                          for (report, _), n in zip(members, before)],
                              status.repositories[counts[0]:], status.problems[counts[1]:], reports[counts[2]:])
    return status


def _repository_history(repo: Repository, members: list[tuple[SpecReport, SpecFile]], scopes: Sequence[Path],
                        config_for: Callable[[SpecFile], RegistryConfig] | None, today: date,
                        status: HistoryStatus, reports: list[SpecReport],
                        prefetched: RegistryHistory | None = None) -> None:
    """:func:`add_history` for one repository: findings on ``members``, new reports appended to ``reports``."""
    root = repo.root
    known = {rel: report.id for report, spec_file in members if report.id
             for rel in [repo.relpath(spec_file.path)] if rel}
    try:
        # a prefetched history is read without the working tree's ids, which only name unreadable versions
        if prefetched is not None and not prefetched.store.unreadable():
            registry = prefetched
            registry.attach(repo)  # it may have been read in another process
        else:
            registry = read_history(repo, known)
        all_tags = repo.tags("prespec")
    except GitProblem as error:
        status.problems.append(f"{root}: {error}")
        for report, _ in members:
            report.findings.append(Finding(
                "history-unreadable", "error", "", None,
                f"the git history of {root} cannot be read ({error}); drift cannot be ruled out. Run "
                "'git fsck' there and restore the missing objects from another clone"))
        return
    tags_by_id = _tags_by_id(all_tags)
    status.repositories.append({"root": str(root), "head": registry.head, "shallow": registry.shallow,
                                "detached": registry.detached, "commits": len(registry.commits)})
    for report, _ in members:  # a committed file parsed and validated once, not again from git
        head = registry.head_snapshot(report.id) if report.id and report.spec and report.document else None
        if head is not None and head.raw is not None and head.raw == report.document.source.encode("utf-8"):
            head.adopt(report.document.data, report.spec)
    seen: set[str] = set()
    for report, spec_file in members:
        if report.id is None:
            continue
        seen.add(report.id)
        report.registration_tags = tags_by_id.get(report.id, [])
        extra = config_for(spec_file).locked_fields if config_for else []
        history = spec_history(registry, report.id, extra, tags=tags_by_id.get(report.id, []))
        report.history = history
        found = list(history.findings)
        if not _committed_as_is(report, registry.head_snapshot(report.id)):
            report.ensure_document()
            work = worktree_snapshot(report)
            if work is not None:
                head = registry.head_snapshot(report.id)
                if head is None:  # the working-tree check below says "untracked" with the right severity
                    found = [f for f in found if f.kind != "untracked"]
                found += uncommitted_findings(head, work, today, extra_locked=extra,
                                              started_on=history.started_on)
        if found:
            report.ensure_document()  # the findings' lines and columns are the working file's
        report.findings += [_with_position(f, report) for f in found]
    for blob, why in registry.unattributed().items():
        status.problems.append(f"{root}: a version of a spec file (blob {blob[:10]}) cannot be read, and no "
                               f"spec it belongs to could be named; its history may be incomplete ({why})")
    deleted = _deleted_reports(registry, seen, scopes, tags_by_id)
    reports += deleted + _missing_registrations(registry, seen, scopes, tags_by_id, deleted)


def _committed_as_is(report: SpecReport, head: Snapshot | None) -> bool:
    """Whether a report rebuilt from the check cache is of exactly HEAD's bytes for its id: then the
    working tree changes nothing against HEAD (no uncommitted finding) and the file need not be
    loaded again."""
    raw = getattr(report, "raw", None)
    return isinstance(raw, bytes) and head is not None and not head.unreadable and head.raw == raw


def add_registration_tags(reports: Sequence[SpecReport], files: Sequence[SpecFile]) -> None:
    """Each report's registration tags, the tags listed once per repository (what :func:`add_history`
    also records), for a run that reads no history but still names each spec's registrations."""
    by_folder: dict[Path, Repository | None] = {}
    by_root: dict[Path, dict[str, list[TagInfo]] | None] = {}
    for report, spec_file in zip(reports, files):
        if report.id is None or report.registration_tags is not None:
            continue
        folder = spec_file.path.absolute().parent
        if folder not in by_folder:
            by_folder[folder] = find_repository(folder)
        repo = by_folder[folder]
        if repo is None:
            continue
        if repo.root not in by_root:
            try:
                by_root[repo.root] = _tags_by_id(repo.tags("prespec"))
            except GitProblem:
                by_root[repo.root] = None  # the summary then says it cannot tell
        tags = by_root[repo.root]
        if tags is not None:
            report.registration_tags = tags.get(report.id, [])


def _no_history(report: SpecReport, spec_file: SpecFile,
                config_for: Callable[[SpecFile], RegistryConfig] | None, today: date) -> None:
    """A spec outside any git repository whose start has passed: nothing shows it was fixed first."""
    if report.spec is None or today < report.spec.data_collection.start:
        return
    required = config_for(spec_file).require_history if config_for else False
    report.add("no-history", "error" if required else "warning", "data_collection.start",
               f"data collection started on {report.spec.data_collection.start} and this spec is not in a git "
               "repository: nothing can show this design was fixed before the start; keep the registry in git and "
               "commit (and register) each spec before its start"
               + (" (require_history: true in .prespec.yaml makes this an error)" if required else ""),
               ("data_collection", "start"))


def _tags_by_id(tags: Sequence[TagInfo]) -> dict[str, list[TagInfo]]:
    """The ``prespec/<id>/vN`` tags grouped by id, in one pass (each spec then looks at its own only)."""
    out: dict[str, list[TagInfo]] = {}
    for tag in tags:
        parts = tag.name.split("/")
        if len(parts) == 3 and tag_version(tag.name, parts[1]) is not None:
            out.setdefault(parts[1], []).append(tag)
    return out


def _missing_registrations(registry: RegistryHistory, seen: set[str], scopes: Sequence[Path],
                           tags_by_id: dict[str, list[TagInfo]], deleted: list[SpecReport]) -> list[SpecReport]:
    """An error for every registered id (a ``prespec/<id>/vN`` tag) with no spec in the working tree:
    on its deleted-spec report when there is one, else on a report of its own."""
    by_id = {spec_id: registrations(registry.repo, spec_id, tags) for spec_id, tags in tags_by_id.items()
             if spec_id not in seen}
    out = []
    reports = {report.id: report for report in deleted}
    for spec_id, found in sorted(by_id.items()):
        last = max(found, key=lambda r: r.version)
        path = last.fields.get("path")
        if path and not _in_scope(registry.repo.root / path, scopes):
            continue
        report = reports.get(spec_id)
        if report is None:
            report = SpecReport(path=display_name(registry.repo.root / path) if path else last.tag.name, id=spec_id)
            out.append(report)
        report.findings.append(Finding(
            "registered-missing", "error", "id", None,
            f"spec {spec_id!r} is registered (tag {last.tag.name}" + (f", file {path}" if path else "") +
            ") but no spec with this id is in the working tree: a registered experiment's record must stay; "
            "restore the file, and withdraw the experiment with status: withdrawn rather than deleting it"))
    return out


def _unreachable_tags(repo: Repository, spec_id: str, tags: Sequence[TagInfo] | None) -> list[Finding]:
    out = []
    for registration in registrations(repo, spec_id, tags):
        if not registration.tag.reachable:
            out.append(Finding(
                "rewritten-history", "warning", "", None,
                f"the registration tag {registration.tag.name} points at commit {registration.tag.commit[:10]}, "
                "which HEAD's history no longer contains: history was rewritten (rebase, amend, reset) after the "
                "registration, so the registered version is not an ancestor of the current one"))
    return out


def _deleted_reports(registry: RegistryHistory, seen: set[str], scopes: Sequence[Path],
                     tags_by_id: dict[str, list[TagInfo]]) -> list[SpecReport]:
    out = []
    for spec_id, events in registry.events.items():
        if spec_id in seen or (events and events[-1].id_to and events[-1].id_to[0] in seen):
            continue  # a changed id: the new id's report carries it
        history = spec_history(registry, spec_id, tags=tags_by_id.get(spec_id, []))
        where = registry.head_ids.get(spec_id)
        last_path = where[0] if where else history.last_path
        if last_path is None or not _in_scope(registry.repo.root / last_path, scopes):
            continue
        report = SpecReport(path=display_name(registry.repo.root / last_path), id=spec_id)
        if where:
            report.findings.append(Finding(
                "deleted", "warning", "", None,
                f"spec {spec_id!r} is in HEAD ({last_path}) but not in the working tree: it was deleted and the "
                "deletion is not committed"))
        # the history's own findings: "deleted" (the commit that removed it) first, then the rest
        report.findings += sorted(history.findings, key=lambda f: f.kind != "deleted")
        report.history = history
        out.append(report)
    return out


def find_spec(target: str, paths: Sequence[str] = (".",),
              config_for: Callable[[SpecFile], RegistryConfig] | None = None) -> tuple[SpecFile, SpecReport]:
    """The spec named by a file path or by its id (searched under ``paths``), checked with its
    registry's settings; an id is looked up only among the files the registry's ``include`` and
    ``exclude`` select, as ``check`` reads them."""
    config_for = config_for or config_loader([])
    candidate = Path(target)
    if candidate.is_file():
        files = discover([target])
        report = check_files(files, config_for)[0]
        return files[0], report
    found = discover(list(paths))
    files, reports, _ = check_registry(found, config_for)
    matches = [(f, r) for f, r in zip(files, reports) if r.id == target]
    if not matches:
        where = ", ".join(display_name(p) for p in paths)
        hint = id_hint(target, [r.id for r in reports if r.id])
        left_out = [f.display for f in found if not f.named and not f.refusal and not config_for(f).selects(f.path)]
        if left_out:
            hint += (f"; the include/exclude of .prespec.yaml leave out {len(left_out)} YAML file"
                     f"{'s' if len(left_out) != 1 else ''} ({', '.join(left_out[:3])}{', ...' if len(left_out) > 3 else ''})")
        raise UsageError(f"no spec with id {target!r} under {where}{hint} (give the id of a spec, or a spec file)")
    if len(matches) > 1:
        raise UsageError(f"id {target!r} is used by {', '.join(r.path for _, r in matches)}; ids must be unique")
    return matches[0]
