"""``prespec hash``: the canonical content hash of a spec (and, on request, the canonical JSON)."""

from __future__ import annotations

import argparse
import json
import sys

from ..problems import json_escaped, plain_text

__all__ = ["hash", "HELP", "add_arguments", "run"]

HELP = "print a spec's canonical content hash (SHA-256 of its locked fields as canonical JSON)"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("spec", metavar="ID|FILE", help="a spec file, or the id of a spec under PATH")
    parser.add_argument("paths", nargs="*", metavar="PATH", help="where to look for an id (default: .)")
    parser.add_argument("--canonical", action="store_true", help="also print the canonical JSON that is hashed")
    parser.add_argument("--json", action="store_true", help="print the hash (and the canonical JSON) as JSON")


def run(args: argparse.Namespace) -> int:
    return hash(args.spec, args.paths or ["."], canonical=args.canonical, as_json=args.json)


def hash(target: str, paths: list[str], *, canonical: bool = False,  # noqa: A001 - command name
         as_json: bool = False) -> int:
    from ..audit import find_spec
    from ..canonical import canonical_json, content_hash

    _, report = find_spec(target, paths)
    if report.spec is None:
        print(plain_text(f"{report.path}: not a valid spec, so it has no canonical content:"), file=sys.stderr)
        for finding in report.findings:
            where = f"{report.path}:{finding.line}" if finding.line else report.path
            print(plain_text(f"  {where}: {finding.field + ': ' if finding.field else ''}{finding.message}"),
                  file=sys.stderr)
        return 1
    if as_json:  # escapes keep the JSON's values exact and its text safe on a terminal
        payload = {"id": report.spec.id, "path": report.path, "sha256": content_hash(report.spec),
                   "canonical": canonical_json(report.spec) if canonical else None}
        print(json_escaped(json.dumps(payload, indent=2, ensure_ascii=False)))
        return 0
    if canonical:
        # the exact hashed text into a file or pipe; on a terminal, no raw DEL, C1 or format character
        # (each a JSON escape there, so the line still parses to the same values)
        text = canonical_json(report.spec)
        print(json_escaped(text) if sys.stdout.isatty() else text)
    print(plain_text(f"{content_hash(report.spec)}  {report.spec.id}  {report.path}"))
    return 0
