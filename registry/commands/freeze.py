"""``prespec freeze``: record a spec's registration as an annotated (or signed) git tag."""

from __future__ import annotations

import argparse
import sys
from datetime import date, datetime, timezone
from pathlib import Path

from .. import __version__
from typing import TYPE_CHECKING

from ..discovery import UsageError
from ..registration import format_message, tag_name

if TYPE_CHECKING:
    from ..git import Repository

__all__ = ["freeze", "HELP", "add_arguments", "run"]

HELP = "register a committed spec before data collection starts, as an annotated git tag prespec/<id>/vN"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("spec", metavar="ID", help="the spec's id (or its file)")
    parser.add_argument("paths", nargs="*", metavar="PATH", help="where to look for the id (default: .)")


def run(args: argparse.Namespace) -> int:
    return freeze(args.spec, args.paths or ["."])


def _refuse(reasons: list[str]) -> int:
    print("prespec freeze: refused:", file=sys.stderr)
    for reason in reasons:
        print(f"  - {reason}", file=sys.stderr)
    return 1


def freeze(target: str, paths: list[str], *, today: date | None = None, now: datetime | None = None) -> int:
    from ..audit import find_spec, registrations
    from ..canonical import content_hash
    from ..git import GitProblem, find_repository

    now = now or datetime.now(timezone.utc)
    today = today or now.astimezone().date()
    spec_file, report = find_spec(target, paths)
    repo = find_repository(spec_file.path.absolute())
    if repo is None:
        raise UsageError(f"{report.path} is not inside a git repository; a registration is a git tag")
    spec = report.spec
    errors = [f for f in report.findings if f.severity == "error"]
    if spec is None or errors:
        return _refuse([f"{report.path}: {f.kind} {f.field + ': ' if f.field else ''}{f.message}" for f in errors]
                       + ["fix the spec and run 'prespec check' until it passes"])
    try:
        reasons = _git_reasons(repo, spec_file.path, report.path, now)
        existing = registrations(repo, spec.id)
    except GitProblem as error:
        return _refuse([f"git in {repo.root} cannot read the repository: {error}; run 'git fsck' there"])
    start = spec.data_collection.start
    if today >= start:
        reasons.append(f"data collection started on {start} (today is {today}); a registration must come "
                       "before the start")
    digest = content_hash(spec)
    if existing and existing[-1].fields.get("content-sha256") == digest and existing[-1].tag.reachable:
        reasons.append(f"{existing[-1].tag.name} already registers this content (sha256 {digest[:16]}...)")
    if reasons:
        return _refuse(reasons)
    relpath, head = repo.relpath(spec_file.path), repo.head()
    assert relpath is not None and head is not None
    name = tag_name(spec.id, max((r.version for r in existing), default=0) + 1)
    message = format_message({"id": spec.id, "path": relpath, "commit": head, "start": start.isoformat(),
                              "content-sha256": digest, "tool": f"prespec {__version__}"})
    sign = repo.signing_configured()
    try:
        repo.create_tag(name, head, message, sign=sign)
    except GitProblem as error:
        return _refuse([str(error)])
    print(f"registered {spec.id} as {'signed ' if sign else ''}tag {name} on commit {head[:10]}")
    print(f"content sha256 {digest}")
    print(f"share it with reviewers: git push <remote> {name}")
    return 0


def _git_reasons(repo: Repository, path: Path, shown: str, now: datetime) -> list[str]:
    """Why git's state forbids a registration now (:class:`GitProblem` when git cannot tell)."""
    from ..history import FUTURE_TOLERANCE

    reasons = []
    relpath = repo.relpath(path)
    head = repo.head()
    if relpath is None or head is None or not repo.is_tracked(relpath):
        return [f"{shown} is not committed; commit it first"]
    repo.blob_at(head, relpath)  # the committed version must be readable: the tag vouches for it
    commit = repo.commit_info(head)
    if commit.committer_date > now + FUTURE_TOLERANCE:
        reasons.append(f"HEAD ({commit.short}) is dated {commit.committer_date.isoformat(timespec='minutes')}, "
                       "later than now: a date set by hand or by a wrong clock; fix the clock and commit again")
    dirty = repo.dirty_paths()
    if dirty:
        shown = ", ".join(dirty[:5]) + (" ..." if len(dirty) > 5 else "")
        reasons.append(f"the working tree has uncommitted changes ({shown}); commit or stash them so the "
                       "registration records exactly what is committed")
    return reasons
