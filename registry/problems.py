"""What goes wrong with one input file, and how it is shown to a person.

Every loader and validator in prespec reports :class:`Problem` objects; a file with
any of them raises one :class:`InvalidSpec` that carries them all, so a user sees
every mistake in a file at once, each with its line, field and a caret under it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

__all__ = ["Problem", "InvalidSpec", "NO_VALUE", "format_problem", "printable", "plain_text", "escaped",
           "json_escaped"]


class _NoValue:
    def __repr__(self) -> str:  # pragma: no cover - debugging aid
        return "NO_VALUE"

    def __reduce__(self) -> str:  # unpickled (from a worker process) as this module's one marker
        return "NO_VALUE"


#: Marker for "the problem is not about a particular value" (a missing key, a file).
NO_VALUE: Any = _NoValue()


@dataclass(frozen=True)
class Problem:
    """One mistake in one file: where it is, which field, and what is allowed."""

    field: str
    message: str
    line: int | None = None
    column: int | None = None
    value: Any = NO_VALUE

    def location(self, path: str) -> str:
        if self.line is None:
            return path
        if self.column is None:
            return f"{path}:{self.line}"
        return f"{path}:{self.line}:{self.column}"


def escaped(ch: str) -> str:
    r"""One character that must not reach a terminal as it is, written visibly: ``\x1b``, ``\x7f``,
    ``\u202e``. A byte of a file name that is not UTF-8 (which Python holds as a lone surrogate)
    is shown as that byte.

    >>> print(escaped(chr(0x1b)), escaped(chr(0x9b)), escaped(chr(0xdce9)))
    \x1b \x9b \xe9
    """
    code = ord(ch)
    if 0xDC80 <= code <= 0xDCFF:
        return f"\\x{code - 0xDC00:02x}"
    return repr(ch)[1:-1]


def printable(text: str, limit: int = 160) -> str:
    """A source line safe to print: tabs as spaces, control characters escaped, long lines cut."""
    text = text.rstrip("\r\n").replace("\t", " ")
    if not text.isprintable():
        text = "".join(ch if ch.isprintable() else escaped(ch) for ch in text)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def plain_text(value: object) -> str:
    r"""User text (a spec value, a path, an author name, a git message) made safe for a terminal: every
    control or format character (ESC, BEL, DEL, C1 codes, bidirectional overrides) escaped visibly, as
    :func:`printable` does for source lines; line breaks kept. Print it as plain text, never as markup.

    >>> print(plain_text("name\x1b]8;;https://x.example\x07 [/]"))
    name\x1b]8;;https://x.example\x07 [/]
    """
    text = str(value)
    if text.isprintable():
        return text
    return "\n".join("".join(ch if ch.isprintable() else escaped(ch) for ch in line)
                     for line in text.split("\n"))


def json_escaped(text: str) -> str:
    r"""JSON text with every character :func:`plain_text` would escape (DEL, C1 controls, format
    characters, line separators, bytes of file names that are not UTF-8) written as a JSON ``\uXXXX``
    escape: still valid JSON with the same values, and nothing raw reaches a terminal. Line breaks,
    which JSON itself writes only between values, are kept.

    >>> print(json_escaped('{"title":"a' + chr(0x7f) + chr(0x9b) + chr(0x202e) + 'b"}'))
    {"title":"a\u007f\u009b\u202eb"}
    """
    if text.isprintable():
        return text
    return "".join(ch if ch.isprintable() or ch == "\n" else _json_escape(ch) for ch in text)


def _json_escape(ch: str) -> str:
    code = ord(ch)
    if code <= 0xFFFF:
        return f"\\u{code:04x}"
    code -= 0x10000  # outside the BMP: a surrogate pair, as JSON writes it
    return f"\\u{0xD800 + (code >> 10):04x}\\u{0xDC00 + (code & 0x3FF):04x}"


def format_problem(problem: Problem, path: str, source_lines: list[str] | None = None) -> str:
    """``file:line:col: field: message`` followed by the source line and a caret."""
    head = problem.location(path) + ": "
    if problem.field:
        head += problem.field + ": "
    text = head + problem.message
    if source_lines and problem.line is not None and 1 <= problem.line <= len(source_lines):
        shown = printable(source_lines[problem.line - 1])
        gutter = f"{problem.line:>5} | "
        text += f"\n{gutter}{shown}"
        if problem.column is not None and problem.column - 1 <= len(shown):
            text += "\n" + " " * (len(gutter) - 2) + "| " + " " * (problem.column - 1) + "^"
    return text


@dataclass
class InvalidSpec(ValueError):
    """A spec file that cannot be used; carries every problem found in it."""

    path: str
    problems: list[Problem]
    source_lines: list[str] = field(default_factory=list, repr=False)

    def __post_init__(self) -> None:
        super().__init__(self.path, self.problems)

    def __str__(self) -> str:
        return "\n".join(format_problem(p, self.path, self.source_lines) for p in self.problems)
