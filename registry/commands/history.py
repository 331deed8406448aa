"""``prespec history``: the field-level changelog of one spec from git."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from typing import TYPE_CHECKING

from ..discovery import UsageError
from ..problems import InvalidSpec
from ..problems import json_escaped, plain_text

if TYPE_CHECKING:
    from ..history import SpecHistory

__all__ = ["history", "HELP", "add_arguments", "run"]

HELP = ("show a spec's field-level changelog from git (exit 1 when a locked field drifted, or when git "
        "holds no readable history of it)")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("spec", metavar="ID", help="the spec's id (or its file)")
    parser.add_argument("paths", nargs="*", metavar="PATH", help="where to look for the id (default: .)")
    parser.add_argument("--json", action="store_true", help="print the changelog as JSON")


def run(args: argparse.Namespace) -> int:
    return history(args.spec, args.paths or ["."], as_json=args.json)


def _locked_extra(spec_file) -> list[str]:
    from ..config import find_config, load_config

    try:
        return load_config(find_config(spec_file.root)).locked_fields
    except InvalidSpec:
        return []


#: History verdicts that make ``prespec history`` exit 1: drift, or a history that cannot vouch at all.
FAILING = ("drift", "unreadable", "untracked")


def history(target: str, paths: list[str], *, as_json: bool = False) -> int:
    """Print one spec's changelog; 0 when it shows no drift, 1 on drift or when git cannot give a history
    for it (never committed, or versions git cannot read)."""
    from ..audit import find_spec, read_history, registrations
    from ..audit import spec_history as audit_spec_history
    from ..checks import CAUTION
    from ..git import GitProblem, find_repository

    try:
        spec_file, report = find_spec(target, paths)
    except UsageError:
        spec_file = report = None  # not in the working tree: a deleted spec still has its history
        where = Path(paths[0]).absolute()
    if report is not None and report.id is None:
        raise UsageError(f"{report.path}: no valid spec id; run 'prespec check {report.path}'")
    if spec_file is not None:
        where = spec_file.path.absolute()
    repo = find_repository(where)
    if repo is None:
        raise UsageError(f"{report.path if report else where} is not inside a git repository, so it has no history")
    spec_id = report.id if report is not None and report.id else target
    relpath = repo.relpath(spec_file.path) if spec_file is not None else None
    try:
        registry = read_history(repo, {relpath: spec_id} if relpath else None)
        tags = registrations(repo, spec_id)
        spec_history = audit_spec_history(registry, spec_id, _locked_extra(spec_file) if spec_file else [],
                                          detail=True, tags=[r.tag for r in tags])
    except GitProblem as error:
        print(plain_text(f"prespec history: the git history of {repo.root} cannot be read: {error}"), file=sys.stderr)
        print(plain_text(f"Verdict: unreadable (run 'git fsck' in {repo.root})"), file=sys.stderr)
        return 1
    if spec_file is None and not spec_history.revisions:
        from ..checks import check_files
        from ..discovery import discover
        from ..hints import id_hint

        hint = id_hint(target, [r.id for r in check_files(discover(paths)) if r.id])
        raise UsageError(f"no spec with id {target!r} under {', '.join(paths)} and none in the git history of "
                         f"{repo.root}{hint} (give the id of a spec, or a spec file)")
    failed = spec_history.verdict in FAILING
    if as_json:
        payload = spec_history.to_dict()
        payload["registrations"] = [{"tag": r.tag.name, "commit": r.tag.commit, "reachable": r.tag.reachable,
                                     **r.fields} for r in tags]
        payload["caution"] = CAUTION
        print(json_escaped(json.dumps(payload, indent=2, ensure_ascii=False, default=str)))
        return 1 if failed else 0
    _print(spec_history, [f"{r.tag.name} -> {r.tag.commit[:10]}" + ("" if r.tag.reachable else " (unreachable)")
                          for r in tags])
    return 1 if failed else 0


def _print(spec_history: SpecHistory, tags: list[str]) -> None:
    from rich.table import Table
    from rich.text import Text

    from ..history import commit_day, show_change
    from ..report import console, plain

    out = console()
    table = Table(show_edge=False, header_style="bold", pad_edge=False)
    for column in ("date", "commit", "author", "field", "change", "when", "status"):
        table.add_column(column, overflow="fold")  # a long path or value wraps, never cut
    for revision in spec_history.revisions:
        commit = revision.commit
        when = "after start" if revision.after_start else "before start"
        common = (commit_day(commit.committer_date).isoformat(), commit.short, plain(commit.author_name))
        locked = [c for c in revision.changes]
        if not locked:
            detail = revision.action + (f" ({revision.old_path} -> {revision.path})"
                                        if revision.action == "moved" else f" ({revision.path or revision.old_path})")
            table.add_row(*common, "-", plain(detail), when, "")
            continue
        for change in locked:
            if not change.locked:
                status = Text("free", style="dim")
            elif not change.after_start:
                status = Text("locked")
            elif change.amended:
                status = Text("amended", style="cyan")
            else:
                status = Text("DRIFT", style="bold red")
            width = 1000 if change.field == "amendments" else 60  # an amendment is read in full
            table.add_row(*common, plain(change.field), plain(show_change(change.old, change.new, width)), when, status)
    out.print(plain(f"History of {spec_history.id} (data collection starts {spec_history.start or 'unknown'}; "
                    f"{len(spec_history.revisions)} commit{'s' if len(spec_history.revisions) != 1 else ''}):"))
    out.print(table)
    for finding in spec_history.findings:
        if finding.kind != "amended":
            out.print(plain(f"{finding.severity} {finding.kind}: {finding.message}"))
    if tags:
        out.print(plain("Registration tags: " + ", ".join(tags)))
    out.print(f"Verdict: {spec_history.verdict}")
