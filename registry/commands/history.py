"""``prespec history``: the field-level changelog of one spec from git."""

from __future__ import annotations

import argparse
import json

from rich.table import Table
from rich.text import Text

from ..audit import find_spec, read_history, registrations
from ..checks import CAUTION
from ..config import find_config, load_config
from ..discovery import UsageError
from ..git import GitProblem, find_repository
from ..history import SpecHistory, commit_day, show_change
from ..problems import InvalidSpec
from ..report import console

__all__ = ["history", "HELP", "add_arguments", "run"]

HELP = "show a spec's field-level changelog from git (exit 1 when a locked field drifted)"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("spec", metavar="ID", help="the spec's id (or its file)")
    parser.add_argument("paths", nargs="*", metavar="PATH", help="where to look for the id (default: .)")
    parser.add_argument("--json", action="store_true", help="print the changelog as JSON")


def run(args: argparse.Namespace) -> int:
    return history(args.spec, args.paths or ["."], as_json=args.json)


def _locked_extra(spec_file) -> list[str]:
    try:
        return load_config(find_config(spec_file.root)).locked_fields
    except InvalidSpec:
        return []


def history(target: str, paths: list[str], *, as_json: bool = False) -> int:
    spec_file, report = find_spec(target, paths)
    if report.id is None:
        raise UsageError(f"{report.path}: no valid spec id; run 'prespec check {report.path}'")
    repo = find_repository(spec_file.path.absolute())
    if repo is None:
        raise UsageError(f"{report.path} is not inside a git repository, so it has no history")
    try:
        registry = read_history(repo)
    except GitProblem as error:
        raise UsageError(str(error)) from None
    spec_history = registry.history(report.id, _locked_extra(spec_file), detail=True)
    tags = registrations(repo, report.id)
    drifted = spec_history.verdict == "drift"
    if as_json:
        payload = spec_history.to_dict()
        payload["registrations"] = [{"tag": r.tag.name, "commit": r.tag.commit, "reachable": r.tag.reachable,
                                     **r.fields} for r in tags]
        payload["caution"] = CAUTION
        print(json.dumps(payload, indent=2, ensure_ascii=False, default=str))
        return 1 if drifted else 0
    _print(spec_history, [f"{r.tag.name} -> {r.tag.commit[:10]}" + ("" if r.tag.reachable else " (unreachable)")
                          for r in tags])
    return 1 if drifted else 0


def _print(spec_history: SpecHistory, tags: list[str]) -> None:
    out = console()
    table = Table(show_edge=False, header_style="bold", pad_edge=False)
    for column in ("date", "commit", "author", "field", "change", "when", "status"):
        table.add_column(column)
    for revision in spec_history.revisions:
        commit = revision.commit
        when = "after start" if revision.after_start else "before start"
        common = (commit_day(commit.committer_date).isoformat(), commit.short, commit.author_name)
        locked = [c for c in revision.changes]
        if not locked:
            detail = revision.action + (f" ({revision.old_path} -> {revision.path})"
                                        if revision.action == "moved" else f" ({revision.path or revision.old_path})")
            table.add_row(*common, "-", detail, when, "")
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
            table.add_row(*common, change.field, show_change(change.old, change.new), when, status)
    out.print(f"History of {spec_history.id} (data collection starts {spec_history.start}; "
              f"{len(spec_history.revisions)} commit(s)):")
    out.print(table)
    for finding in spec_history.findings:
        if finding.kind != "amended":
            out.print(Text(f"{finding.severity} {finding.kind}: {finding.message}"))
    if tags:
        out.print("Registration tags: " + ", ".join(tags))
    out.print(f"Verdict: {spec_history.verdict}")
