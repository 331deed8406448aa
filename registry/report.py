"""Human and JSON output of check results."""

from __future__ import annotations

import json
import os
import re
import sys
from typing import IO, Any

from rich.console import Console
from rich.padding import Padding
from rich.table import Table
from rich.text import Text

from .checks import CAUTION, SpecReport
from .problems import json_escaped, plain_text, printable

__all__ = ["console", "plain", "print_table", "print_findings", "to_json", "VERDICT_STYLES"]

VERDICT_STYLES = {"ok": "green", "oversized": "yellow", "underpowered": "bold red", "invalid": "bold red"}
_SEVERITY_STYLES = {"error": "red", "warning": "yellow", "info": "cyan"}


_TRAILING = re.compile(r"[ \t]+((?:\x1b\[[0-9;]*m)*)$", re.MULTILINE)


class _Console(Console):
    """A rich console whose lines never end in the spaces that pad tables and wrapped text."""

    def _render_buffer(self, buffer: Any) -> str:
        return _TRAILING.sub(r"\1", super()._render_buffer(buffer))


def console(file: IO[str] | None = None) -> Console:
    """A console that uses colour only on a terminal and never when NO_COLOR is set, and reads no
    markup in what it prints (user text such as ``[/]`` or ``[link=...]`` stays text)."""
    stream = file or sys.stdout
    tty = bool(getattr(stream, "isatty", lambda: False)())
    plain = bool(os.environ.get("NO_COLOR")) or not tty
    return _Console(file=stream, color_system=None if plain else "auto", no_color=plain, highlight=False,
                   emoji=False, markup=False, width=None if tty else 120)


def plain(value: object) -> Text:
    """User text as a rich :class:`Text`: never read as markup, control characters escaped."""
    return Text(plain_text(value))


def _n(value: int | None) -> str:
    return "-" if value is None else f"{value:,}"


_COLUMNS = (("spec", "left"), ("design", "left"), ("planned", "right"), ("needed", "right"), ("power", "right"),
            ("target", "right"), ("verdict", "left"))


def print_table(out: Console, reports: list[SpecReport]) -> None:
    rows = []
    for report in reports:
        power = "-" if report.achieved_power is None else f"{report.achieved_power:.3f}"
        target = "-" if report.target_power is None else f"{report.target_power:g}"
        rows.append((plain_text(report.id or report.path), report.test or "-", _n(report.planned_per_group),
                     _n(report.required_per_group), power, target, report.verdict))
    if _print_plain_table(out, rows):
        return
    table = Table(title=None, show_edge=False, header_style="bold", pad_edge=False)
    for name, justify in _COLUMNS:
        table.add_column(name, justify=justify)  # type: ignore[arg-type]
    for *cells, verdict in rows:
        table.add_row(Text(cells[0]), *cells[1:], Text(verdict, style=VERDICT_STYLES.get(verdict, "bold red")))
    out.print(table)


def _print_plain_table(out: Console, rows: list[tuple[str, ...]]) -> bool:
    """Write the table as rich lays it out (``tests/test_report.py`` compares them), without rich's
    per-cell rendering, when that layout is plain: no terminal and no colour, ASCII cells, and a
    cells with no space at either end, and a table that fits the width so nothing wraps. False
    (nothing written) otherwise."""
    if out.is_terminal or out.color_system is not None or out.record:
        return False
    header = tuple(name for name, _ in _COLUMNS)
    widths = [len(name) for name in header]
    for row in rows:
        for index, cell in enumerate(row):
            if not (cell.isascii() and cell.isprintable()) or cell != cell.strip():
                return False  # wide or unusual characters, or edge spaces rich trims: rich lays it out
            widths[index] = max(widths[index], len(cell))
    if sum(widths) + 3 * (len(widths) - 1) > out.width:
        return False

    def line(cells: tuple[str, ...], bar: str) -> str:
        parts = [cell.rjust(width) if justify == "right" else cell.ljust(width)
                 for cell, width, (_, justify) in zip(cells, widths, _COLUMNS)]
        return f" {bar} ".join(parts).rstrip(" ")

    last = len(widths) - 1
    rule = "╇".join("━" * (width + (1 if index in (0, last) else 2)) for index, width in enumerate(widths))
    out.file.write("\n".join([line(header, "┃"), rule, *(line(row, "│") for row in rows)]) + "\n")
    return True


def print_findings(out: Console, reports: list[SpecReport], *, show_info: bool = True) -> None:
    for report in reports:
        shown = [f for f in report.findings if show_info or f.severity != "info"]
        if not shown:
            continue
        out.print()
        out.print(Text(plain_text(f"{report.path}" + (f"  ({report.id})" if report.id else "")), style="bold"))
        lines = report.document.source_lines if report.document else report.source_lines
        for finding in shown:
            where = f"{report.path}:{finding.line}" if finding.line else report.path
            if finding.line and finding.column:
                where += f":{finding.column}"
            head = Text("  ")
            head.append(f"{finding.severity} {finding.kind}", style=_SEVERITY_STYLES[finding.severity])
            head.append(plain_text(f"  {where}"))
            if finding.field:
                head.append(plain_text(f"  {finding.field}"), style="bold")
            out.print(head)
            out.print(Padding(plain(finding.message), (0, 0, 0, 4), expand=False))
            if finding.kind == "invalid" and finding.line and 1 <= finding.line <= len(lines):
                source = printable(lines[finding.line - 1])
                out.print(Text(f"    {finding.line:>4} | {source}", style="dim"))
                if finding.column and finding.column - 1 <= len(source):
                    out.print(Text("         | " + " " * (finding.column - 1) + "^", style="dim"))


def summary_line(reports: list[SpecReport]) -> str:
    errors = sum(1 for r in reports if r.has_errors)
    warnings = sum(1 for r in reports for f in r.findings if f.severity == "warning")
    return (f"{len(reports)} spec{'s' if len(reports) != 1 else ''} checked: {errors} with errors, "
            f"{warnings} warning{'s' if warnings != 1 else ''}.")


def to_json(reports: list[SpecReport], extra: dict[str, Any] | None = None) -> str:
    payload: dict[str, Any] = {"specs": [r.to_dict() for r in reports]}
    payload.update(extra or {})
    payload["caution"] = CAUTION
    return json_escaped(json.dumps(payload, indent=2, ensure_ascii=False))
