"""Put untrusted text into Markdown so it stays text: no links, emphasis, headings, HTML or table breaks.

Spec fields are written by people; a title such as ``[x](javascript:...)`` or a cell
holding ``|`` must come out as the characters typed. CommonMark lets a backslash
escape any ASCII punctuation, so we escape every character that can start markup.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Sequence

__all__ = ["inline", "block", "cell", "table", "bullets", "code"]

# Characters that can open inline markup or an HTML tag, an entity, or split a table row.
_SPECIAL = re.compile(r"([\\`*_\[\]<>|!&~#{}])")
# Line starts that would open a bullet list, a thematic break or an ordered list ("1. ", "2) ").
_LEADING = re.compile(r"^([-+]|\d{1,9}(?=[.)](\s|$)))")
_SPACE = re.compile(r"\s+")
# Control characters other than whitespace have no business in a summary; they are shown as U+FFFD.
_CONTROL = re.compile(r"[\x00-\x08\x0b\x0e-\x1f\x7f-\x9f]")


def inline(text: object) -> str:
    """One line of literal text: whitespace (newlines too) collapses to single spaces.

    >>> inline("[x](javascript:alert(1)) <b>*hi*</b>")
    '\\\\[x\\\\](javascript:alert(1)) \\\\<b\\\\>\\\\*hi\\\\*\\\\</b\\\\>'
    >>> inline("- not a list"), inline("1. not a list"), inline("0.05 is a number")
    ('\\\\- not a list', '1\\\\. not a list', '0.05 is a number')
    """
    escaped = _escape(text)
    match = _LEADING.match(escaped)
    if match:
        if match.group(1)[0].isdigit():  # "1. text" -> "1\. text"
            escaped = escaped[: match.end()] + "\\" + escaped[match.end():]
        else:
            escaped = "\\" + escaped
    return escaped


def _escape(text: object) -> str:
    visible = _CONTROL.sub("\ufffd", str(text))
    return _SPECIAL.sub(r"\\\1", _SPACE.sub(" ", visible).strip())


def block(text: object) -> str:
    """Literal paragraphs: blank lines separate paragraphs, other line breaks become spaces."""
    paragraphs = [p for p in re.split(r"\n\s*\n", str(text).replace("\r\n", "\n")) if p.strip()]
    return "\n\n".join(inline(p) for p in paragraphs)


def cell(text: object) -> str:
    """Text for one table cell, ``|`` escaped; an empty cell shows a dash. Cells hold no blocks, so a
    leading "1." or "-" needs no escape.

    >>> cell("a|b"), cell("0.05"), cell("")
    ('a\\\\|b', '0.05', '-')
    """
    out = _escape(text)
    return out if out else "-"


def table(headers: Sequence[str], rows: Iterable[Sequence[str]], align: Sequence[str] | None = None) -> str:
    """A GFM table. Headers and cells must already be Markdown (use :func:`cell` for user text)."""
    align = align or ["l"] * len(headers)
    rule = {"l": "---", "r": "---:", "c": ":---:"}
    lines = ["| " + " | ".join(headers) + " |", "| " + " | ".join(rule[a] for a in align) + " |"]
    for row in rows:
        lines.append("| " + " | ".join(row) + " |")
    return "\n".join(lines)


def bullets(items: Iterable[str]) -> str:
    """A bullet list of Markdown items (already escaped)."""
    return "\n".join(f"- {item}" for item in items)


def code(text: str) -> str:
    """An inline code span for text we produced ourselves (ids, hashes, commands); never user prose.

    A backtick inside gets a longer fence (CommonMark code spans), so a command naming a folder
    with backticks stays one span.

    >>> code("a `b` c")
    '`` a `b` c ``'
    """
    if "\n" in text:
        raise ValueError(f"code spans are one line; got {text!r}")
    runs = re.findall(r"`+", text)
    if not runs:
        return f"`{text}`"
    fence = "`" * (max(len(run) for run in runs) + 1)
    return f"{fence} {text} {fence}"
