"""``prespec pilot``: summarise a pilot or control data column for the spec's SD assumption."""

from __future__ import annotations

import argparse
import json
import math

from typing import TYPE_CHECKING

from ..discovery import UsageError
from ..problems import json_escaped

if TYPE_CHECKING:
    from ..pilot import PilotSummary

__all__ = ["pilot", "HELP", "add_arguments", "run"]

HELP = "summarise a pilot data column: SD, its upper confidence limit and the file's SHA-256 for design.pilot"


def _confidence(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a number in [0.5, 1); got {text!r}") from None
    if not (math.isfinite(value) and 0.5 <= value < 1):
        hint = f"; did you mean {value / 100:g}?" if 1 < value <= 100 else ""
        raise argparse.ArgumentTypeError(f"must be in [0.5, 1){hint}; got {text!r}")
    return value


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("file", metavar="FILE", help="CSV file with a header row")
    parser.add_argument("--column", required=True, metavar="NAME", help="the column holding the values")
    parser.add_argument("--confidence", type=_confidence, default=0.8,
                        help="one-sided confidence level of the SD's upper limit (default 0.8)")
    parser.add_argument("--json", action="store_true", help="print the summary as JSON")


def run(args: argparse.Namespace) -> int:
    return pilot(args.file, args.column, confidence=args.confidence, as_json=args.json)


def pilot(file: str, column: str, *, confidence: float = 0.8, as_json: bool = False) -> int:
    """Print the pilot summary of ``column`` in ``file``; 0 on success."""
    from ..checks import CAUTION
    from ..pilot import InvalidPilot, read_pilot

    try:
        summary = read_pilot(file, column, confidence)
    except InvalidPilot as error:
        raise UsageError(str(error)) from None
    if as_json:
        payload = summary.to_dict()
        payload["caution"] = CAUTION
        print(json_escaped(json.dumps(payload, indent=2, ensure_ascii=False)))
        return 0
    _print_human(summary)
    return 0


def _print_human(s: PilotSummary) -> None:
    from ..checks import CAUTION
    from ..report import console, plain

    out = console()
    level = f"{s.confidence:.0%}"
    missing = f" ({s.missing} missing cell{'s' if s.missing != 1 else ''} skipped)" if s.missing else ""
    rows = [
        ("values", f"{s.n}{missing}"),
        ("mean", f"{s.mean:.6g}"),
        ("SD", f"{s.sd:.6g} (n - 1 denominator)"),
        ("upper limit", f"{s.sd_upper:.6g} (one-sided {level} confidence limit of the SD; Browne 1995)"),
        ("SHA-256", str(s.sha256)),
    ]
    out.print(plain(f"Pilot data: {s.file}, column {s.column!r}"))
    for label, text in rows:
        out.print(f"  {label:<11}  {text}", soft_wrap=True)
    out.print()
    out.print("To record it in a spec (write file relative to the spec's folder):", soft_wrap=True)
    snippet = (
        "design:\n"
        "  effect:\n"
        f"    sd: {s.sd_upper:.4g}        # the upper limit; at least the pilot SD {s.sd:.4g}\n"
        "  pilot:\n"
        f"    file: {json.dumps(s.file)}\n"
        f"    column: {json.dumps(s.column)}\n"
        f"    sha256: \"{s.sha256}\"\n"
        f"    confidence: {s.confidence:g}"
    )
    out.print(snippet, soft_wrap=True, markup=False)
    out.print()
    out.print(f"Note: {CAUTION}", soft_wrap=True)
