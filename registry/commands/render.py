"""``prespec render``: write the design summary of one spec, or of all, as Markdown and HTML."""

from __future__ import annotations

import argparse
import difflib
import os
import sys
from pathlib import Path

from typing import TYPE_CHECKING

from ..discovery import UsageError, discover
from ..fsutil import WriteRefused, confined, write_atomic
from ..problems import plain_text

if TYPE_CHECKING:
    from datetime import datetime

    from ..checks import SpecReport
    from ..summary import Summary

__all__ = ["render", "HELP", "add_arguments", "run"]

HELP = "write a preregistration-style summary (Markdown and HTML) of a spec, or of every spec with --all"


def _own_markers() -> dict[str, str]:
    """How each kind of file render writes begins or identifies itself; only such files are overwritten."""
    from ..summary.figure import SVG_MARKER

    return {
        ".md": "[//]: # (prespec ",
        ".html": '<meta name="generator" content="prespec ',
        ".svg": SVG_MARKER,
    }


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("spec_id", nargs="?", metavar="ID", help="id of the spec to render")
    parser.add_argument("--all", action="store_true", help="render every valid spec and an index.html")
    parser.add_argument("--out", metavar="DIR", default=None,
                        help="folder to write into (default: the current folder; required with --all)")
    parser.add_argument("--registry", metavar="PATH", action="append", default=None,
                        help="registry folder or spec file to search; repeat for several (default: the current folder)")
    parser.add_argument("--no-history", action="store_true",
                        help="do not read git history (the drift verdict then says 'history not checked')")


def run(args: argparse.Namespace) -> int:
    return render(args.spec_id, all_specs=args.all, out=args.out, registry=args.registry or ["."],
                  history=not args.no_history)


def _renderable(report: SpecReport) -> bool:
    duplicate = any(f.kind == "duplicate-id" for f in report.findings)
    return report.spec is not None and report.sample is not None and not duplicate


def _why_not(report: SpecReport) -> str:
    lines = [f"{report.path}: cannot render this spec:"]
    lines += [f"  {f.field or 'spec'}: {f.message}" for f in report.findings if f.severity == "error"]
    return "\n".join(lines)


def _own(path: Path) -> bool:
    """Whether ``path`` is a regular file prespec wrote: its marker begins the first line (Markdown) or
    one of the first lines (HTML, SVG). Opened without blocking and only when it is a regular file."""
    import stat

    marker = _own_markers().get(path.suffix)
    if marker is None:
        return False
    try:
        if not stat.S_ISREG(os.lstat(path).st_mode):
            return False
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOFOLLOW", 0))
        with os.fdopen(fd, "rb") as handle:
            head = handle.read(4096).decode("utf-8", "replace").splitlines()
    except OSError:
        return False
    lines = head[:1] if path.suffix == ".md" else head[:12]
    return any(line.lstrip().startswith(marker) for line in lines)


def _targets(out: Path, names: list[str]) -> list[Path]:
    """Confined paths for every file, refusing before anything is written if one may not be replaced."""
    targets = []
    for name in names:
        target = confined(out, name)
        if target.is_symlink():
            raise WriteRefused(f"{target} is a symbolic link (to {os.readlink(target)!r}); prespec will not "
                               "write through it, since it may lead outside the output folder")
        if target.is_dir():
            raise WriteRefused(f"{target} is a folder; prespec writes a file of that name")
        if target.exists() and not target.is_file():
            raise WriteRefused(f"{target} is not a regular file (a FIFO, device or socket); prespec will not open "
                               "or replace it")
        if target.exists() and not _own(target):
            raise WriteRefused(f"{target} exists and was not written by prespec render; "
                               "move it away or choose another --out folder")
        targets.append(target)
    return targets


def _write(out: Path, files: dict[str, str]) -> list[Path]:
    targets = _targets(out, list(files))
    for target, text in zip(targets, files.values()):
        write_atomic(target, text)
    return targets


#: From this many summaries on, they are built (their figures drawn) in worker processes, one per core.
POOL_FROM = 12


def _summaries(jobs: list[tuple[SpecReport, Path]], rendered_at: datetime, index_link: bool) -> list[Summary]:
    """Every job's summary, in order; in a pool of forked worker processes when there are many and
    more than one core (where forking is unavailable or the pool fails, one after the other)."""
    import multiprocessing

    from ..summary import build_summary

    workers = min(os.cpu_count() or 1, len(jobs))
    if len(jobs) >= POOL_FROM and workers > 1 and "fork" in multiprocessing.get_all_start_methods():
        from concurrent.futures import ProcessPoolExecutor
        from concurrent.futures.process import BrokenProcessPool
        from functools import partial

        _JOBS[:] = jobs  # forked workers inherit the jobs: only their numbers and the summaries are sent
        build = partial(_build_summary, rendered_at=rendered_at, index_link=index_link)
        try:
            with ProcessPoolExecutor(workers, mp_context=multiprocessing.get_context("fork")) as pool:
                return list(pool.map(build, range(len(jobs)), chunksize=max(1, len(jobs) // (4 * workers))))
        except (BrokenProcessPool, OSError):
            pass  # e.g. no shared memory for the pool's queues: build them here instead
        finally:
            _JOBS.clear()
    return [build_summary(report, path, rendered_at, index_link=index_link) for report, path in jobs]


#: The jobs of the pool running now, read by its forked workers.
_JOBS: list[tuple[SpecReport, Path]] = []


def _build_summary(index: int, *, rendered_at: datetime, index_link: bool) -> Summary:
    from ..summary import build_summary

    report, path = _JOBS[index]
    return build_summary(report, path, rendered_at, index_link=index_link)


def render(spec_id: str | None, *, all_specs: bool = False, out: str | None = None,
           registry: list[str] | None = None, history: bool = True) -> int:
    """Render one spec (by id) or all; 0 when everything asked for was written, 1 otherwise."""
    from ..audit import add_history
    from ..checks import CAUTION, check_files
    from ..config import config_loader
    from ..summary import IndexRow, build_index, render_time

    if all_specs == (spec_id is not None):
        raise UsageError("give a spec ID, or --all (with --out DIR), but not both")
    if all_specs and out is None:
        raise UsageError("--all needs --out DIR: the folder for the summaries and index.html")
    folder = Path(out if out is not None else ".")
    if folder.exists() and not folder.is_dir():
        raise UsageError(f"--out {out}: is a file, not a folder")
    rendered_at = render_time()
    registry = registry or ["."]
    config_errors: list[str] = []
    spec_files = discover(registry)
    config_for = config_loader(config_errors)
    reports = check_files(spec_files, config_for)
    if history:
        add_history(reports, spec_files, registry, config_for)
    for error in config_errors:
        print(plain_text(error), file=sys.stderr)
    if spec_id is not None:
        chosen = [r for r in reports if r.id == spec_id]
        if not chosen:
            known = sorted({r.id for r in reports if r.id})
            close = difflib.get_close_matches(spec_id, known, n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            listing = f" Ids found: {', '.join(known)}." if known else " No specs were found there."
            raise UsageError(f"no spec with id {spec_id!r} under {', '.join(registry)}{hint}{listing}")
        if len(chosen) > 1:
            print(f"prespec: error: id {spec_id!r} is used by several files: "
                  f"{', '.join(r.path for r in chosen)}; ids must be unique", file=sys.stderr)
            return 1
        reports = chosen
    files_by_path = {spec_file.display: spec_file for spec_file in spec_files}
    files: dict[str, str] = {}
    rows: list[IndexRow] = []
    failed = False
    jobs = [(report, files_by_path[report.path].path) for report in reports if _renderable(report)]
    summaries = iter(_summaries(jobs, rendered_at, all_specs))
    for report in reports:
        if not _renderable(report):
            print(plain_text(_why_not(report)), file=sys.stderr)
            rows.append(IndexRow(report, None))
            failed = True
            continue
        summary = next(summaries)
        files.update(summary.files())
        rows.append(IndexRow(report, f"{summary.spec_id}.html"))
    if all_specs:
        index_md, index_html = build_index(rows, rendered_at)
        files.update({"index.md": index_md, "index.html": index_html})
    try:
        written = _write(folder, files)
    except (WriteRefused, OSError) as error:
        print(plain_text(f"prespec: error: {error}"), file=sys.stderr)
        return 1
    pages = [p for p in written if p.suffix == ".html"]
    for path in pages:
        print(plain_text(f"wrote {path}"))
    print(plain_text(f"{len(written)} file{'s' if len(written) != 1 else ''} written to {folder}."))
    print(f"Note: {CAUTION}")
    return 1 if failed or config_errors else 0
