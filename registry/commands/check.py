"""``prespec check``: validate specs and recompute their sample sizes."""

from __future__ import annotations

import argparse
import sys

from typing import TYPE_CHECKING

from ..discovery import UsageError, discover
from ..problems import plain_text

if TYPE_CHECKING:
    from ..checks import SpecReport

__all__ = ["check", "HELP", "add_arguments", "run"]

HELP = "validate specs, recompute each sample size and flag under- and oversized designs"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("paths", nargs="*", metavar="PATH", default=None,
                        help="registry folders and/or spec files (default: the current folder)")
    parser.add_argument("--json", action="store_true", help="print the results as JSON")
    parser.add_argument("--no-history", action="store_true",
                        help="skip the git history checks (drift, uncommitted edits, deleted specs)")
    parser.add_argument("--oversize-margin", type=float, default=None, metavar="FRACTION",
                        help="flag a design as oversized above required x (1 + FRACTION) "
                        "(default 0.25, or the registry's .prespec.yaml)")
    parser.add_argument("--no-cache", action="store_true",
                        help="neither use nor keep the results of earlier runs (kept in the repository's "
                        ".git/prespec/check-cache, or the user cache folder outside git)")
    parser.add_argument("--workers", type=int, default=1, metavar="N",
                        help="run the simulations of simulation-verified sizes in N processes (default 1)")


def run(args: argparse.Namespace) -> int:
    return check(args.paths or ["."], as_json=args.json, oversize_margin=args.oversize_margin,
                 history=not args.no_history, workers=args.workers, cache=not args.no_cache)


def check(paths: list[str], *, as_json: bool = False, oversize_margin: float | None = None,
          history: bool = True, workers: int = 1, cache: bool = True) -> int:
    """Check every spec under ``paths``; 0 when no error finding, 1 otherwise. ``cache``: reuse and keep
    results of earlier runs for what has not changed (:mod:`registry.checkcache`)."""
    # Only what checking the files needs is loaded before worker processes fork to check them; git,
    # the history machinery and the console are loaded here while they work (see _meanwhile).
    from ..checks import CAUTION, check_registry, skipped_line
    from ..config import config_loader

    if oversize_margin is not None and not 0 <= oversize_margin <= 10:
        raise UsageError(f"--oversize-margin must be between 0 and 10; got {oversize_margin!r}")
    if not 1 <= workers <= 1024:
        raise UsageError(f"--workers must be between 1 and 1024; got {workers!r}")
    files = discover(paths)
    config_errors: list[str] = []
    config_for = config_loader(config_errors, oversize_margin)
    reports: list[SpecReport]
    results = None
    if cache:
        from ..checkcache import CheckCache

        results = CheckCache()
    prefetched: dict = {}
    if workers > 1:
        from concurrent.futures import ProcessPoolExecutor

        with ProcessPoolExecutor(workers) as pool:
            files, reports, skipped = check_registry(files, config_for, pool, results)
    else:  # while worker processes check many files, this one reads the git history
        files, reports, skipped = check_registry(files, config_for, cache=results,
                                                 meanwhile=lambda: _meanwhile(paths, prefetched, history))
    from ..audit import add_history
    from ..report import console, print_findings, print_table, summary_line, to_json

    status = add_history(reports, files, paths, config_for, cache=results, prefetched=prefetched) if history else None
    failed = any(r.has_errors for r in reports) or bool(config_errors) or bool(status and status.problems)
    if as_json:
        extra: dict[str, object] = {"config_errors": config_errors} if config_errors else {}
        extra["skipped"] = skipped
        extra["history"] = status.to_dict() if status else {"checked": False, "message": "skipped (--no-history)"}
        print(to_json(reports, extra))
        return 1 if failed else 0
    out = console()
    for error in config_errors:
        print(plain_text(error), file=sys.stderr)
    if skipped:
        print(skipped_line(skipped), file=sys.stderr)
    if not reports:
        out.print(plain_text(f"No spec files (*.yaml, *.yml) found under {', '.join(paths)}."))
        return 0
    print_table(out, reports)
    print_findings(out, reports)
    out.print()
    out.print(summary_line(reports))
    for problem in status.problems if status else ():
        out.print(plain_text(f"History problem: {problem}"))
    if status is not None and status.message():
        out.print(plain_text(status.message()))
    out.print(f"Note: {CAUTION}")
    return 1 if failed else 0


def _meanwhile(paths: list[str], prefetched: dict, history: bool) -> None:
    """What this process does while worker processes check the files: it loads what reporting needs
    and reads the git history of each repository (into ``prefetched``) unless ``history`` is off."""
    from ..audit import prefetch_histories
    from .. import report  # noqa: F401 - loaded now, used once the reports are in

    if history:
        prefetched.update(prefetch_histories(paths))
