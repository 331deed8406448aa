"""``prespec render``: write the design summary of one spec, or of all, as Markdown and HTML."""

from __future__ import annotations

import argparse
import json
import os
import sys
from pathlib import Path

from typing import TYPE_CHECKING, Any

from ..discovery import UsageError, discover
from ..hints import id_hint
from ..fsutil import WriteRefused, confined, write_atomic
from ..problems import json_escaped, plain_text
from ..workers import ForkedWorkers

if TYPE_CHECKING:
    from ..checks import SpecReport
    from ..summary import IndexRow

__all__ = ["render", "HELP", "add_arguments", "run"]

HELP = "write a preregistration-style summary (Markdown and HTML) of a spec, or of every spec with --all"


def _own_markers() -> dict[str, str]:
    """How each kind of file render writes begins or identifies itself; only such files are overwritten."""
    from ..summary.figure import SVG_MARKER

    return {
        ".md": "[//]: # (prespec ",
        ".html": '<meta name="generator" content="prespec ',
        ".svg": SVG_MARKER,
        ".js": "// prespec ",
    }


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("spec_id", nargs="?", metavar="ID", help="id of the spec to render (none with --all)")
    parser.add_argument("paths", nargs="*", metavar="PATH",
                        help="registry folders or spec files to search (default: the current folder)")
    parser.add_argument("--all", action="store_true", help="render every valid spec and an index.html")
    parser.add_argument("--out", metavar="DIR", default=None,
                        help="folder to write the Markdown, HTML and figure into (required with --all); "
                        "without it, one spec's Markdown summary is printed and nothing is written")
    parser.add_argument("--registry", metavar="PATH", action="append", default=None, help=argparse.SUPPRESS)
    parser.add_argument("--no-history", action="store_true",
                        help="do not read git history (the drift verdict then says 'history not checked')")
    parser.add_argument("--json", action="store_true",
                        help="print what was rendered as JSON (with the Markdown when nothing is written)")


def run(args: argparse.Namespace) -> int:
    spec_id, paths = args.spec_id, list(args.paths)
    if args.all and spec_id is not None:  # with --all there is no ID: the first word is a PATH
        if not os.path.lexists(spec_id):
            raise UsageError(f"give a spec ID, or --all (with --out DIR), but not both: with --all every word "
                             f"is a registry PATH, and there is no file or folder {spec_id!r}")
        spec_id, paths = None, [spec_id, *paths]
    registry = paths + (args.registry or [])
    return render(spec_id, all_specs=args.all, out=args.out, registry=registry or ["."],
                  history=not args.no_history, as_json=args.json)


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


def _add_files(files: dict[str, str], new: dict[str, str], owner: str) -> None:
    """Add ``new`` to the files of this render; a name already taken is refused (WriteRefused), never
    silently replaced."""
    taken = sorted(files.keys() & new.keys())
    if taken:
        raise WriteRefused(f"{owner} would be written as {', '.join(taken)}, which another file of this render "
                           "already is")
    files.update(new)


def _write(out: Path, files: dict[str, str], *, durable: bool = True) -> list[Path]:
    """Write ``files`` into ``out``, each through a temporary file and a rename; ``durable=False``
    skips flushing each to disk (the summaries of --all: regenerable, and thousands of them)."""
    targets = _targets(out, list(files))
    for target, text in zip(targets, files.values()):
        write_atomic(target, text, durable=durable)
    return targets


#: From this many summaries on, they are built (their figures drawn) in worker processes, one per core.
POOL_FROM = 12


def _expected_names(report: SpecReport) -> list[str]:
    """The files a renderable spec's summary is written to (checked before anything is written)."""
    from ..summary.document import figure_name, page_stem

    assert report.spec is not None
    spec_id = report.spec.id
    names = [f"{page_stem(spec_id)}.md", f"{page_stem(spec_id)}.html", figure_name(spec_id)]
    if report.sequential is not None:
        from ..summary.sequential import boundary_figure_name

        names.append(boundary_figure_name(spec_id))
    return names


class _Progress:
    """A progress bar on standard error when it is a terminal (rich, transient); nothing otherwise."""

    def __init__(self, total: int) -> None:
        self._bar: Any = None
        if total and getattr(sys.stderr, "isatty", lambda: False)():
            from rich.console import Console
            from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

            console = Console(file=sys.stderr, markup=False, highlight=False, emoji=False,
                              no_color=bool(os.environ.get("NO_COLOR")))
            self._bar = Progress(TextColumn("rendering"), BarColumn(), MofNCompleteColumn(), TimeRemainingColumn(),
                                 console=console, transient=True)
            self._task = self._bar.add_task("render", total=total)
            self._bar.start()

    def advance(self) -> None:
        if self._bar is not None:
            self._bar.advance(self._task)

    def close(self) -> None:
        if self._bar is not None:
            self._bar.stop()
            self._bar = None


def render(spec_id: str | None, *, all_specs: bool = False, out: str | None = None,
           registry: list[str] | None = None, history: bool = True, as_json: bool = False) -> int:
    """Render one spec (by id) or all; 0 when everything asked for was written, 1 otherwise."""
    from ..audit import add_history, add_registration_tags
    from ..checks import CAUTION, check_registry, skipped_line
    from ..config import config_loader
    from ..summary import IndexRow, build_index, build_summary, file_facts, render_time
    from ..summary.htmlpage import SITE_SCRIPT, SITE_SCRIPT_NAME

    if all_specs == (spec_id is not None):
        raise UsageError("give a spec ID, or --all (with --out DIR), but not both")
    if all_specs and out is None:
        raise UsageError("--all needs --out DIR: the folder for the summaries and index.html (outside the "
                         "registry, e.g. --out summaries)")
    folder = Path(out if out is not None else ".")
    if folder.exists() and not folder.is_dir():
        raise UsageError(f"--out {out}: is a file, not a folder")
    rendered_at = render_time()
    registry = registry or ["."]
    config_errors: list[str] = []
    spec_files = discover(registry)
    config_for = config_loader(config_errors)
    spec_files, reports, skipped = check_registry(spec_files, config_for)
    if skipped and all_specs:
        print(skipped_line(skipped), file=sys.stderr)
    if history:
        add_history(reports, spec_files, registry, config_for)
    else:  # the summaries still name each spec's registration tags: list them once, not once per spec
        add_registration_tags(reports, spec_files)
    for error in config_errors:
        print(plain_text(error), file=sys.stderr)
    if spec_id is not None:
        chosen = [r for r in reports if r.id == spec_id]
        if not chosen:
            known = sorted({r.id for r in reports if r.id})
            hint = id_hint(spec_id, known)
            listing = f" Ids found: {', '.join(known)}." if known else " No specs were found there."
            raise UsageError(f"no spec with id {spec_id!r} under {', '.join(registry)}{hint}{listing}")
        if len(chosen) > 1:
            print(f"prespec: error: id {spec_id!r} is used by several files: "
                  f"{', '.join(r.path for r in chosen)}; ids must be unique", file=sys.stderr)
            return 1
        reports = chosen
    files_by_path = {spec_file.display: spec_file for spec_file in spec_files}
    rows: list[IndexRow] = []
    failed = False
    jobs = [(report, files_by_path[report.path].path) for report in reports if _renderable(report)]
    index_names = [SITE_SCRIPT_NAME, "index.md", "index.html"] if all_specs else []
    written: list[Path] = []
    if out is not None:
        try:  # every file this run writes may be written, or nothing is
            _targets(folder, [name for report, _ in jobs for name in _expected_names(report)] + index_names)
        except (WriteRefused, OSError) as error:
            print(plain_text(f"prespec: error: {error}"), file=sys.stderr)
            return 1
    files: dict[str, str] = {}  # without --out: the one spec's files, printed instead of written
    claimed: dict[str, str] = dict.fromkeys(index_names, "")  # every name this run writes, once
    try:  # two files of this run with one name: refused before anything is written
        for report, _ in jobs:
            _add_files(claimed, dict.fromkeys(_expected_names(report), ""), f"the summary of {report.spec.id!r}")
    except WriteRefused as error:
        print(plain_text(f"prespec: error: {error}; nothing was written"), file=sys.stderr)
        return 1
    facts = file_facts([path for _, path in jobs]) if all_specs else {}  # git asked once per folder
    summaries = ForkedWorkers(lambda index: build_summary(*jobs[index], rendered_at, index_link=all_specs,
                                                          facts=facts.get(jobs[index][1])),
                              len(jobs), from_count=POOL_FROM)
    built = summaries.results()
    progress = _Progress(len(jobs) if all_specs and out is not None else 0)
    try:
        for report in reports:
            if not _renderable(report):
                print(plain_text(_why_not(report)), file=sys.stderr)
                rows.append(IndexRow(report, None))
                failed = True
                continue
            summary = next(built)
            rows.append(IndexRow(report, summary.page))
            if out is None:
                files.update(summary.files())
                continue
            # each summary as it is done: an interrupt keeps them (the index, written last, is flushed to disk)
            written += _write(folder, summary.files(), durable=not all_specs)
            progress.advance()
        progress.close()
        if all_specs:  # the index last, once every page it links to is written
            index_md, index_html = build_index(rows, rendered_at)
            index = {SITE_SCRIPT_NAME: SITE_SCRIPT, "index.md": index_md, "index.html": index_html}
            if out is None:
                files.update(index)
            else:
                written += _write(folder, index)
    except (WriteRefused, OSError) as error:
        print(plain_text(f"prespec: error: {error}"), file=sys.stderr)
        return 1
    finally:
        progress.close()
        summaries.close()
    if out is None:  # nothing is written: the registry stays as it is
        return _print_unwritten(rows, files, as_json, failed)
    if as_json:
        _print_json(rows, written, folder)
        return 1 if failed or config_errors else 0
    pages = [p for p in written if p.suffix == ".html"]
    for path in pages:
        print(plain_text(f"wrote {path}"))
    print(plain_text(f"{len(written)} file{'s' if len(written) != 1 else ''} written to {folder}."))
    print(f"Note: {CAUTION}")
    return 1 if failed or config_errors else 0


def _row_json(row: IndexRow) -> dict[str, object]:
    from ..summary import drift_verdict

    report = row.report
    return {"id": report.id, "path": report.path, "verdict": report.verdict,
            "drift": drift_verdict(report) if report.spec is not None else None, "page": row.page}


def _print_json(rows: list[IndexRow], written: list[Path], folder: Path | None,
                markdown: dict[str, str] | None = None) -> None:
    from ..checks import CAUTION
    from ..summary import page_stem

    specs = [_row_json(row) for row in rows]
    if markdown is not None:
        for spec in specs:
            spec["markdown"] = markdown.get(f"{page_stem(str(spec['id']))}.md")
    payload = {"out": None if folder is None else str(folder), "written": [str(p) for p in written],
               "specs": specs, "caution": CAUTION}
    print(json_escaped(json.dumps(payload, indent=2, ensure_ascii=False)))


def _print_unwritten(rows: list[IndexRow], files: dict[str, str], as_json: bool, failed: bool) -> int:
    """One spec without --out: its Markdown summary on standard output, no file written."""
    from ..checks import CAUTION

    if as_json:
        _print_json(rows, [], None, markdown=files)
        return 1 if failed else 0
    for name, text in files.items():
        if name.endswith(".md"):
            sys.stdout.write(text if text.endswith("\n") else text + "\n")
    print(f"(nothing written; add --out DIR for the HTML page and figure) Note: {CAUTION}", file=sys.stderr)
    return 1 if failed else 0
