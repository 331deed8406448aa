"""``prespec check``: validate specs and recompute their sample sizes."""

from __future__ import annotations

import argparse
import gc
import sys

from typing import TYPE_CHECKING

from ..discovery import UsageError, discover
from ..problems import plain_text

if TYPE_CHECKING:
    from pathlib import Path

    from ..audit import RegistryHistory
    from ..checks import SpecReport
    from ..workers import BackgroundCall

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
    # What a check builds lives to its end and holds next to no reference cycles: a cold check of
    # 1,000 specs x 10 versions ends at 189 MB with the garbage collector on or paused
    # (benchmarks/bench_check.py), while its passes over the libraries just loaded cost 3-4% of a
    # cold check of the example registry. So the collector is paused while a check runs (its
    # worker processes inherit that), and restored after.
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        return check(args.paths or ["."], as_json=args.json, oversize_margin=args.oversize_margin,
                     history=not args.no_history, workers=args.workers, cache=not args.no_cache)
    finally:
        if was_enabled:
            gc.enable()


def check(paths: list[str], *, as_json: bool = False, oversize_margin: float | None = None,
          history: bool = True, workers: int = 1, cache: bool = True) -> int:
    """Check every spec under ``paths``; 0 when no error finding, 1 otherwise. ``cache``: reuse and keep
    results of earlier runs for what has not changed (:mod:`registry.checkcache`)."""
    # Only what checking the files needs is loaded before worker processes fork to check them; the
    # git history is read on the side from before that, and the console loaded while they work
    # (see _Meanwhile).
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
    meanwhile = _Meanwhile(paths, history)
    if workers > 1:
        from concurrent.futures import ProcessPoolExecutor

        with ProcessPoolExecutor(workers) as pool:
            files, reports, skipped = check_registry(files, config_for, pool, results)
    else:  # while worker processes check many files, the git history is read on the side
        try:
            files, reports, skipped = check_registry(files, config_for, cache=results, meanwhile=meanwhile)
        finally:
            meanwhile.close()
    from ..audit import add_history
    from ..report import console, print_findings, print_table, summary_line, to_json

    status = add_history(reports, files, paths, config_for, cache=results, prefetched=meanwhile.histories) \
        if history else None
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


class _Meanwhile:
    """What ``check`` does while worker processes check the spec files (see
    :class:`registry.checks.Meanwhile`): unless ``history`` is off, a process forked before the
    statistics load reads the git history of each repository on the core that loading leaves idle
    (it needs none of them), and this process then loads git and the console and takes that
    history (into :attr:`histories`, by repository root, for :func:`registry.audit.add_history`).
    Where no such process could run or give its result, the history is read here instead."""

    def __init__(self, paths: list[str], history: bool) -> None:
        self.paths, self.history = paths, history
        self.histories: dict[Path, RegistryHistory] = {}
        self._reader: BackgroundCall | None = None

    def before(self) -> None:
        if self.history:
            from ..workers import BackgroundCall

            self._reader = BackgroundCall(_read_histories, self.paths)

    def during(self) -> None:
        from .. import report  # noqa: F401 - loaded now, used once the reports are in
        from ..audit import prefetch_histories

        if not self.history:
            return
        read = self._reader.result() if self._reader is not None else None
        self._reader = None
        self.histories.update(read if read is not None else prefetch_histories(self.paths))

    def close(self) -> None:
        """Stop the history reader if its history was never taken (the checks were interrupted)."""
        if self._reader is not None:
            self._reader.close()
            self._reader = None


def _read_histories(paths: list[str]) -> dict[Path, RegistryHistory]:
    """In the history reader's process: every repository's history (:func:`registry.audit.prefetch_histories`)."""
    from ..audit import prefetch_histories

    return prefetch_histories(paths)
