"""``prespec verify``: a reviewer's check of a spec's registration against the git history."""

from __future__ import annotations

import argparse
import json
from dataclasses import dataclass
from datetime import date, datetime, timezone
from pathlib import Path

from ..audit import find_spec, read_history, registrations
from ..canonical import content_hash
from ..checks import CAUTION
from ..config import find_config, load_config
from ..discovery import UsageError
from ..git import GitProblem, Repository, find_repository
from ..history import FUTURE_TOLERANCE, commit_day, show_change
from ..problems import InvalidSpec
from ..report import console, plain
from ..validation import validate_document
from ..yamlio import load_bytes

__all__ = ["verify", "HELP", "add_arguments", "run"]

HELP = "check a spec's registration tag: present, before the start, hash matching, no unamended change since"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("spec", metavar="ID", help="the spec's id")
    parser.add_argument("paths", nargs="*", metavar="PATH", help="the registry (default: .)")
    parser.add_argument("--json", action="store_true", help="print the result as JSON")


def run(args: argparse.Namespace) -> int:
    return verify(args.spec, args.paths or ["."], as_json=args.json)


@dataclass(frozen=True)
class _Check:
    name: str
    ok: bool
    detail: str


def _repository(target: str, paths: list[str]) -> tuple[Repository, str, list[str], dict[str, str]]:
    try:
        spec_file, report = find_spec(target, paths)
    except UsageError:
        spec_file = None  # deleted from the working tree: the tags still tell
        report = None
    where = spec_file.path.absolute() if spec_file else Path(paths[0]).absolute()
    repo = find_repository(where)
    if repo is None:
        raise UsageError(f"{where} is not inside a git repository; registrations are git tags")
    extra: list[str] = []
    spec_id = report.id if report and report.id else target
    known: dict[str, str] = {}
    if spec_file is not None:
        try:
            extra = load_config(find_config(spec_file.root)).locked_fields
        except InvalidSpec:
            pass
        relpath = repo.relpath(spec_file.path)
        known = {relpath: spec_id} if relpath else {}
    return repo, spec_id, extra, known


def verify(target: str, paths: list[str], *, as_json: bool = False, now: datetime | None = None) -> int:
    repo, spec_id, extra, known = _repository(target, paths)
    try:
        checks = _verify(repo, spec_id, extra, known, now or datetime.now(timezone.utc))
    except GitProblem as error:
        checks = [_Check("registration tag", False, f"git in {repo.root} cannot read the tags: {error}")]
    ok = all(c.ok for c in checks)
    if as_json:
        print(json.dumps({"id": spec_id, "verified": ok, "checks": [c.__dict__ for c in checks],
                          "caution": CAUTION}, indent=2, ensure_ascii=False))
        return 0 if ok else 1
    out = console()
    for check in checks:
        out.print(plain(f"{'ok  ' if check.ok else 'FAIL'}  {check.name}: {check.detail}"))
    out.print(plain(f"{spec_id}: {'registration verified' if ok else 'NOT verified'}"))
    out.print(f"Note: {CAUTION}")
    return 0 if ok else 1


def _verify(repo: Repository, spec_id: str, extra: list[str], known: dict[str, str], now: datetime) -> list[_Check]:
    regs = registrations(repo, spec_id)
    if not regs:
        return [_Check("registration tag", False, f"no tag prespec/{spec_id}/vN in this repository (fetch the "
                       "tags: git fetch --tags)")]
    latest = regs[-1]
    tag = latest.tag
    checks = [_Check("registration tag", latest.problem is None and latest.fields.get("id") == spec_id,
                     f"{tag.name} by {tag.tagger} on {tag.tagged_date}" if latest.problem is None
                     else f"{tag.name}: {latest.problem}")]
    if latest.problem is not None:
        return checks
    fields = latest.fields
    checks.append(_Check("reachable from HEAD", tag.reachable,
                         f"{tag.name} -> {tag.commit[:10]}" + ("" if tag.reachable else
                                                               ": not in HEAD's history (rewritten history?)")))
    checks.append(_Check("recorded commit", fields["commit"] == tag.commit,
                         f"the block records {fields['commit'][:10]}, the tag points at {tag.commit[:10]}"))
    try:
        start = date.fromisoformat(fields["start"])
        commit = repo.commit_info(tag.commit)
        parents = [repo.commit_info(parent) for parent in commit.parents]
    except (ValueError, GitProblem) as error:
        return checks + [_Check("before the start", False, f"cannot read the start or the commit: {error}")]
    before = commit_day(commit.committer_date) < start and (
        tag.tagged_date is None or commit_day(tag.tagged_date) < start)
    # a date set in the future, or before the parent's, is no evidence that anything came before the start
    doubts = []
    if commit.committer_date > now + FUTURE_TOLERANCE:
        doubts.append(f"the commit is dated after now ({now.isoformat(timespec='minutes')})")
    if tag.tagged_date is not None and tag.tagged_date > now + FUTURE_TOLERANCE:
        doubts.append(f"the tag is dated after now ({now.isoformat(timespec='minutes')})")
    doubts += [f"the commit is dated before its parent {p.short} ({p.committer_date.isoformat(timespec='minutes')})"
               for p in parents if commit.committer_date < p.committer_date]
    if tag.tagged_date is not None and tag.tagged_date + FUTURE_TOLERANCE < commit.committer_date:
        doubts.append("the tag is dated before the commit it points at")
    checks.append(_Check("before the start", before and not doubts,
                         f"commit dated {commit.committer_date.isoformat(timespec='minutes')}, tag dated "
                         f"{tag.tagged_date.isoformat(timespec='minutes') if tag.tagged_date else '-'}, "
                         f"start {start}" + ("; but " + "; ".join(doubts) + ": these dates were set by hand or by "
                                             "a wrong clock and prove nothing" if doubts else "")))
    try:
        raw = repo.blob_at(tag.commit, fields["path"])
    except GitProblem as error:
        return checks + [_Check("content hash", False, f"{fields['path']} at {tag.commit[:10]} cannot be read: "
                                f"{error}"), _after_registration(repo, spec_id, tag.commit, extra, known, now)]
    digest = None
    if raw is not None:
        try:
            spec = validate_document(load_bytes(raw, fields["path"]))
            digest = content_hash(spec)
            if spec.data_collection.start != start:
                checks.append(_Check("recorded start", False, f"the spec at the tag says {spec.data_collection.start}"))
        except InvalidSpec as error:
            checks.append(_Check("content hash", False, f"{fields['path']} at {tag.commit[:10]} is not valid: {error}"))
            return checks
    checks.append(_Check("content hash", digest == fields["content-sha256"],
                         f"sha256 {fields['content-sha256'][:16]}... recorded; "
                         + ("matches" if digest == fields["content-sha256"] else
                            f"{fields['path']} at the tag gives {digest[:16] + '...' if digest else 'nothing (missing)'}")))
    checks.append(_after_registration(repo, spec_id, tag.commit, extra, known, now))
    return checks


def _after_registration(repo: Repository, spec_id: str, registered: str, extra: list[str],
                        known_paths: dict[str, str], now: datetime) -> _Check:
    try:
        registry = read_history(repo, known_paths)
        registry.now = now
        known = repo.ancestors(registered)
    except GitProblem as error:
        return _Check("no unamended change since", False, f"the git history of {repo.root} cannot be read: {error}")
    history = registry.history(spec_id, extra, detail=True)
    problems = []
    if registry.shallow:
        problems.append("the repository is a shallow clone; fetch the full history (git fetch --unshallow)")
    for revision in history.revisions:
        if revision.commit.sha in known:
            continue
        if revision.action == "removed" and spec_id not in registry.head_ids:
            problems.append(f"deleted in {revision.commit.short}")
        for change in revision.changes:
            if change.locked and not change.amended:
                problems.append(f"{change.field} {show_change(change.old, change.new)} in "
                                f"{revision.commit.short} ({revision.commit.committer_date.date()})")
    for finding in history.findings:
        if finding.kind in ("drift", "incomplete-history", "history-unreadable") and finding.message not in problems:
            if finding.kind == "incomplete-history" and registry.shallow:
                continue
            problems.append(finding.message)
    later = sum(1 for r in history.revisions if r.commit.sha not in known)
    detail = "; ".join(problems) if problems else f"{later} later commit(s) touch the spec, no unamended locked change"
    return _Check("no unamended change since", not problems, detail)
