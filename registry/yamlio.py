"""Safe YAML loading that remembers where every value came from.

ruamel.yaml composes the node graph; this module builds plain Python values from it
itself, so no tag can ever construct an object, duplicate keys and alias bombs are
caught, and each key and value keeps its line and column for error messages.
Only the YAML 1.2 core types are accepted: mappings, sequences, strings, integers,
floats, booleans, null and dates (kept as ISO text for the model to parse).

Every way a file can be unusable (not UTF-8, binary, too large, too deep, too many
values, a syntax error, a tag) becomes an :class:`~registry.problems.InvalidSpec`
naming the line and column; nothing else escapes :func:`load_file`.
"""

from __future__ import annotations

import contextlib
import errno
import io
import math
import os
import re
import stat
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ruamel.yaml import YAML
from ruamel.yaml.composer import Composer, MaxDepthExceededError
from ruamel.yaml.error import MarkedYAMLError, YAMLError
from ruamel.yaml.nodes import Node
from ruamel.yaml.reader import ReaderError
from ruamel.yaml.tag import Tag

from .problems import NO_VALUE, InvalidSpec, Problem

__all__ = [
    "read_spec_bytes",
    "load_bytes_fast",
    "peek_scalars",
    "FAST_LOADER",
    "Document",
    "Location",
    "load_text",
    "load_bytes",
    "load_file",
    "dump",
    "MAX_FILE_BYTES",
    "MAX_NODES",
    "MAX_DEPTH",
    "MAX_NUMBER_CHARS",
]

#: A spec is a page of text; anything larger is not a spec.
MAX_FILE_BYTES = 1_000_000
#: Values in a file, counted after expanding aliases; bounds memory against "billion laughs".
MAX_NODES = 20_000
#: Nesting depth of mappings and sequences (the top-level mapping is level 0).
MAX_DEPTH = 40
#: Longest number literal; longer digit strings are not measurements.
MAX_NUMBER_CHARS = 100

Location = tuple[Any, ...]  # field path: ("design", "effect", "sd") or ("amendments", 0, "date")

_CORE = "tag:yaml.org,2002:"
_SCALAR_TAGS = {_CORE + t for t in ("str", "int", "float", "bool", "null", "timestamp", "binary")}
_PLAIN_DATA = "specs hold plain data only (mappings, lists, text, numbers, true/false, dates)"
_SURROGATE_RE = re.compile("[\ud800-\udfff]")
_NULL_TEXTS = ("", "~", "null", "Null", "NULL")
_BOOL_TEXTS = {"true": True, "false": False}
_DIRECTIVE_RE = re.compile(r"^%YAML[ \t]+([^\s#]*)", re.MULTILINE)
#: A line starting with %YAML: a directive (the main loader handles those), or text that could be one.
_DIRECTIVE_BYTES_RE = re.compile(rb"^(?:\xef\xbb\xbf)?%YAML", re.MULTILINE)
_UTF32_BOMS = (b"\xff\xfe\x00\x00", b"\x00\x00\xfe\xff")
_UTF16_BOMS = (b"\xff\xfe", b"\xfe\xff")


@dataclass
class Document:
    """Plain data of one YAML file plus the position of every key and value."""

    path: str
    data: Any
    source: str
    value_positions: dict[Location, tuple[int, int]] = field(default_factory=dict)
    key_positions: dict[Location, tuple[int, int]] = field(default_factory=dict)

    @property
    def source_lines(self) -> list[str]:
        return self.source.splitlines()

    def position(self, loc: Location, *, key: bool = False) -> tuple[int | None, int | None]:
        """1-based (line, column) of the value (or key) at ``loc``, else of its nearest ancestor."""
        loc = tuple(loc)
        if key and loc in self.key_positions:
            return self.key_positions[loc]
        while True:
            if loc in self.value_positions:
                return self.value_positions[loc]
            if loc in self.key_positions:
                return self.key_positions[loc]
            if not loc:
                return (None, None)
            loc = loc[:-1]


class _LimitError(MarkedYAMLError):
    """A file beyond one of the caps, raised while composing (before any value is built)."""


class _BoundedComposer(Composer):
    """ruamel's composer, refusing to compose more than :data:`MAX_NODES` nodes, and reading a scalar
    with the non-specific tag ``!`` (``! 64``) as text, as YAML 1.2 says, not resolving it as if plain."""

    def compose_scalar_node(self, anchor: Any) -> Any:
        non_specific = str(self.parser.peek_event().ctag) == "!"
        node = super().compose_scalar_node(anchor)
        if non_specific:
            node.tag = Tag(suffix=_CORE + "str")
        return node

    def compose_node(self, parent: Any, index: Any) -> Any:
        self.composed = getattr(self, "composed", 0) + 1
        if self.composed > MAX_NODES:
            mark = self.parser.peek_event().start_mark
            raise _LimitError(problem=_too_many_values(aliases=False), problem_mark=mark)
        return super().compose_node(parent, index)


class _Stop(Exception):
    """Building stops: a cap was reached and going on would only waste time and memory."""


def _too_many_values(*, aliases: bool) -> str:
    if aliases:
        return (f"the file expands to more than {MAX_NODES:,} values once its aliases (*name) are "
                "expanded; a spec is plain data, write the values out instead of repeating them with aliases")
    return f"the file holds more than {MAX_NODES:,} values; a spec has at most a few hundred"


class _Builder:
    def __init__(self, doc: Document) -> None:
        self.doc = doc
        self.problems: list[Problem] = []
        self.nodes = 0
        self.seen: set[int] = set()
        self.open: set[int] = set()  # collections being built: an alias to one of them is a cycle
        self.aliased = False

    def _problem(self, loc: Location, node: Node, message: str, value: Any = NO_VALUE) -> None:
        mark = node.start_mark
        self.problems.append(Problem(_dotted(loc), message, mark.line + 1, mark.column + 1, value))

    def _tag_problem(self, loc: Location, node: Node, tag: str) -> None:
        self._problem(loc, node, f"the tag {_short_tag(tag)} is not allowed; {_PLAIN_DATA}")

    def build(self, node: Node, loc: Location, depth: int = 0) -> Any:
        self.nodes += 1
        if id(node) in self.seen:
            self.aliased = True
        self.seen.add(id(node))
        if self.nodes > MAX_NODES:
            # Point at the top-level key whose value is too large: the alias site itself is not kept.
            top = loc[:1]
            line, column = self.doc.key_positions.get(top) or (node.start_mark.line + 1, node.start_mark.column + 1)
            self.problems.append(Problem(_dotted(top), _too_many_values(aliases=self.aliased), line, column))
            raise _Stop
        if id(node) in self.open:
            name = f"*{node.anchor} " if isinstance(node.anchor, str) else ""
            self._problem(loc, node, f"the alias {name}is used inside the list or mapping it refers to, which "
                          "starts here (a recursive alias); a spec is plain data, write the values out")
            return None
        if depth > MAX_DEPTH:
            self._problem(loc, node, f"nested more than {MAX_DEPTH} levels deep (counting aliases); "
                          "a spec is at most a few levels deep")
            return None
        self.doc.value_positions.setdefault(loc, (node.start_mark.line + 1, node.start_mark.column + 1))
        tag = str(node.tag) if node.tag is not None else ""
        # node ids, not classes: the C composer's nodes belong to another library
        if node.id == "scalar":
            return self._scalar(node, loc, tag)
        expected = _CORE + ("map" if node.id == "mapping" else "seq")
        if tag != expected:
            self._tag_problem(loc, node, tag)
            return None
        self.open.add(id(node))
        try:
            if node.id == "mapping":
                return self._mapping(node, loc, depth)
            return [self.build(item, loc + (i,), depth + 1) for i, item in enumerate(node.value)]
        finally:
            self.open.discard(id(node))

    def _mapping(self, node: Node, loc: Location, depth: int) -> dict[str, Any]:
        out: dict[str, Any] = {}
        first_seen: dict[str, int] = {}
        for key_node, value_node in node.value:
            self.nodes += 1
            key_tag = str(key_node.tag)
            if key_tag == _CORE + "merge":
                self._problem(loc, key_node, "merge keys ('<<') are not supported; write the keys out")
                continue
            if key_tag not in _SCALAR_TAGS | {_CORE + "map", _CORE + "seq"}:
                self._tag_problem(loc, key_node, key_tag)
                continue
            if key_node.id != "scalar":
                self._problem(loc, key_node, "a key must be plain text, not a list or mapping")
                continue
            key = str(key_node.value)
            if _SURROGATE_RE.search(key):
                self._problem(loc, key_node, _surrogate_message(key))
                continue
            line, column = key_node.start_mark.line + 1, key_node.start_mark.column + 1
            if key in first_seen:
                self._problem(loc + (key,), key_node,
                              f"the key {_short(key)} appears twice in this mapping (first on line "
                              f"{first_seen[key]}); give each key once", key)
                continue
            first_seen[key] = line
            self.doc.key_positions[loc + (key,)] = (line, column)
            if value_node.id == "scalar" and value_node.value == "" and not value_node.style:
                # An empty value has no text of its own: point at its key.
                self.doc.value_positions.setdefault(loc + (key,), (line, column))
            out[key] = self.build(value_node, loc + (key,), depth + 1)
        return out

    def _scalar(self, node: Node, loc: Location, tag: str) -> Any:
        text: str = node.value
        if node.style == ">":  # ruamel marks folds in folded scalars with BEL; they are not content
            text = text.replace("\a", "")
        if tag not in _SCALAR_TAGS:
            self._tag_problem(loc, node, tag)
            return None
        kind = tag[len(_CORE):]
        if kind in ("str", "timestamp"):
            if _SURROGATE_RE.search(text):
                self._problem(loc, node, _surrogate_message(text))
                return None
            return text
        if kind == "null":
            if text not in _NULL_TEXTS:
                self._problem(loc, node, f"{_short(text)} is tagged !!null but is not empty, ~ or null", text)
            return None
        if kind == "bool":
            value = _BOOL_TEXTS.get(text.lower())
            if value is None:
                self._problem(loc, node, f"{_short(text)} is tagged !!bool but is not true or false", text)
            return value
        if kind in ("int", "float"):
            if len(text) > MAX_NUMBER_CHARS:
                self._problem(loc, node, f"a number written with {len(text):,} characters; numbers in a spec "
                              f"have at most {MAX_NUMBER_CHARS} characters")
                return None
            number = _parse_int(text) if kind == "int" else _parse_float(text)
            if number is None:
                self._problem(loc, node, f"{_short(text)} is tagged !!{kind} but is not "
                              f"{'a whole number' if kind == 'int' else 'a number'}", text)
                return None
            if isinstance(number, float) and math.isinf(number) and not _is_inf_literal(text):
                self._problem(loc, node, f"the number {text} is too large to represent (it overflows to "
                              "infinity)", text)
                return None
            return number
        self._problem(loc, node, "binary data (!!binary) is not allowed in a spec; " + _PLAIN_DATA)
        return None


def _parse_int(text: str) -> int | float | None:
    """A YAML 1.2 core integer (decimal, 0o octal, 0x hex); None when the text is none of them."""
    clean = text.replace("_", "")
    if not clean.isascii():  # int() also reads other scripts' digits (Arabic-Indic, fullwidth): not YAML's
        return None
    sign = -1 if clean.startswith("-") else 1
    body = clean.lstrip("+-")
    try:
        if body[:2].lower() == "0o":
            return sign * int(body[2:], 8)
        if body[:2].lower() == "0x":
            return sign * int(body[2:], 16)
        return sign * int(body, 10)
    except ValueError:
        return _parse_float(text)


def _parse_float(text: str) -> float | None:
    clean = text.replace("_", "").lower()
    if not clean.isascii():  # float() also reads other scripts' digits: not YAML's
        return None
    if clean in (".nan", "nan", "+.nan", "-.nan"):
        return math.nan
    if _is_inf_literal(clean):
        return -math.inf if clean.startswith("-") else math.inf
    try:
        return float(clean)
    except ValueError:
        return None


def _is_inf_literal(text: str) -> bool:
    return text.lower().lstrip("+-") in (".inf", "inf", "infinity")


def _surrogate_message(text: str) -> str:
    code = ord(_SURROGATE_RE.search(text).group())  # type: ignore[union-attr]
    return (f"the text contains the escape \\u{code:04x}, half of a UTF-16 surrogate pair, which is not a "
            "character; write the character itself or its \\U escape")


def _short(value: Any, limit: int = 80) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 4] + "...'"


def _short_tag(tag: str) -> str:
    return "!!" + tag[len(_CORE):] if tag.startswith(_CORE) else tag


def _dotted(loc: Location) -> str:
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += ("." if out else "") + str(part)
    return out


def _line_column(text: str, index: int) -> tuple[int, int]:
    line = text.count("\n", 0, index) + 1
    return line, index - (text.rfind("\n", 0, index) + 1) + 1


def _looks_utf16(raw: bytes) -> bool:
    """Text saved as UTF-16 or UTF-32 without a byte-order mark: zero bytes in a regular pattern."""
    sample = raw[:4096]
    if len(sample) < 4:
        return False
    for step in (2, 4):  # UTF-16: one lane of zeros beside one of text; UTF-32: three beside one
        lanes = [sample[offset::step] for offset in range(step)]
        zero = [lane.count(0) > 0.9 * len(lane) for lane in lanes]
        text = [lane for lane, is_zero in zip(lanes, zero) if not is_zero]
        if sum(zero) == step - 1 and len(text) == 1 and text[0].count(0) < 0.5 * len(text[0]):
            return True
    return False


def _decode(raw: bytes, path: str) -> str:
    if raw.startswith(_UTF32_BOMS):
        raise InvalidSpec(path, [Problem("", "the file is UTF-32 encoded (it starts with a UTF-32 byte-order "
                                         "mark); save it as UTF-8")])
    if raw.startswith(_UTF16_BOMS):
        raise InvalidSpec(path, [Problem("", "the file is UTF-16 encoded (it starts with a UTF-16 byte-order "
                                         "mark); save it as UTF-8")])
    if b"\x00" in raw:
        if _looks_utf16(raw):
            raise InvalidSpec(path, [Problem("", "the file looks like UTF-16 or UTF-32 text without a "
                                             "byte-order mark (every second or fourth byte is zero); save it as "
                                             "UTF-8")])
        line, column = _line_column(raw.decode("latin-1"), raw.index(b"\x00"))
        raise InvalidSpec(path, [Problem("", "this is a binary file, not a YAML text spec (it contains zero "
                                         "bytes)", line, column)])
    if raw.startswith(b"\xef\xbb\xbf"):
        raw = raw[3:]  # a UTF-8 byte-order mark is harmless
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        start = raw.rfind(b"\n", 0, exc.start) + 1
        line = raw.count(b"\n", 0, exc.start) + 1
        column = len(raw[start:exc.start].decode("utf-8", errors="replace")) + 1
        byte = raw[exc.start]
        if exc.reason == "unexpected end of data":
            raise InvalidSpec(path, [Problem("", f"the file is not valid UTF-8: it ends in the middle of a "
                                             f"character (byte 0x{byte:02x}); it may be cut short, save it again as "
                                             "UTF-8", line, column)]) from None
        guess = bytes([byte]).decode("cp1252", errors="replace")
        hint = (f" (if the file was saved as Latin-1 or Windows-1252, this byte is {guess!r})"
                if guess.isprintable() and guess != "\ufffd" else "")
        raise InvalidSpec(path, [Problem("", f"the file is not valid UTF-8: byte 0x{byte:02x} cannot be read"
                                         f"{hint}; save the file as UTF-8", line, column)]) from None


def load_bytes(raw: bytes, path: str) -> Document:
    """Parse one spec file's bytes; raise :class:`InvalidSpec` with every problem found."""
    if len(raw) > MAX_FILE_BYTES:
        raise _too_large(path, len(raw))
    return load_text(_decode(raw, path), path)


def _too_large(path: str, size: int) -> InvalidSpec:
    return InvalidSpec(path, [Problem("", f"the file is {size:,} bytes; a spec is a page of text, at most "
                                      f"{MAX_FILE_BYTES:,} bytes")])


def _unreadable(shown: str, exc: OSError) -> InvalidSpec:
    reasons = {
        errno.EACCES: "permission denied: prespec may not read it",
        errno.EPERM: "permission denied: prespec may not read it",
        errno.ENOENT: "it does not exist (a broken symbolic link, or deleted while checking)",
        errno.ELOOP: "it is a symbolic link loop",
        errno.EISDIR: "it is a folder, not a spec file",
    }
    reason = reasons.get(exc.errno if exc.errno is not None else -1, exc.strerror or str(exc))
    return InvalidSpec(shown, [Problem("", f"cannot be read: {reason}")])


def load_file(path: str | Path, display: str | None = None) -> Document:
    """Read and parse a spec file; unreadable, special and oversized files become an :class:`InvalidSpec` too."""
    shown = display or str(path)
    return load_bytes_fast(read_spec_bytes(path, shown), shown)


def read_spec_bytes(path: str | Path, shown: str) -> bytes:
    """A spec file's bytes, read the way :func:`load_file` reads them (:class:`InvalidSpec` for a folder,
    a device, pipe or socket, an oversized or unreadable file)."""
    try:
        # O_NONBLOCK: opening a FIFO named *.yaml must not hang; it is refused below as not a regular file.
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0))
    except OSError as exc:
        raise _unreadable(shown, exc) from None
    try:
        info = os.fstat(fd)
        if stat.S_ISDIR(info.st_mode):
            raise InvalidSpec(shown, [Problem("", "cannot be read: it is a folder, not a spec file")])
        if not stat.S_ISREG(info.st_mode):
            raise InvalidSpec(shown, [Problem("", "is not a regular file (a device, pipe or socket); a spec is "
                                              "a text file")])
        if info.st_size > MAX_FILE_BYTES:
            raise _too_large(shown, info.st_size)
        with os.fdopen(fd, "rb", closefd=False) as handle:
            raw = handle.read(MAX_FILE_BYTES + 1)
    except OSError as exc:
        raise _unreadable(shown, exc) from None
    finally:
        os.close(fd)
    return raw


def _parser() -> YAML:
    yaml = YAML(typ="rt", pure=True)
    yaml.Composer = _BoundedComposer
    yaml.max_depth = MAX_DEPTH + 1  # ruamel counts the top-level node as depth 1
    return yaml


def load_text(text: str, path: str) -> Document:
    """Parse spec text; one mapping document is expected."""
    doc = Document(path=path, data=None, source=text)
    lines = text.splitlines()
    version = _DIRECTIVE_RE.search(text)
    if version and version.group(1) != "1.2":
        line, column = _line_column(text, version.start())
        raise InvalidSpec(path, [Problem("", f"the file declares '%YAML {version.group(1)}'; prespec reads "
                                         "YAML 1.2 only (where yes/no are text and 010 is ten), so remove "
                                         "that line", line, column)], lines)
    try:
        with warnings.catch_warnings(), contextlib.redirect_stdout(io.StringIO()):
            warnings.simplefilter("ignore")  # a reused anchor name is legal YAML
            roots = list(_parser().compose_all(io.StringIO(text)))
    except ReaderError as exc:
        raise InvalidSpec(path, [_reader_problem(exc, text)], lines) from None
    except MarkedYAMLError as exc:
        raise InvalidSpec(path, [_syntax_problem(exc, lines)], lines) from None
    except RecursionError:
        raise InvalidSpec(path, [Problem("", f"nested too deeply; a spec is at most {MAX_DEPTH} levels deep")],
                          lines) from None
    except (YAMLError, ValueError, TypeError, AssertionError, AttributeError, IndexError, KeyError) as exc:
        # ruamel raises plain exceptions for a few malformed inputs (bad directives, odd tags).
        raise InvalidSpec(path, [Problem("", f"not valid YAML: {_first_line(exc)}")], lines) from None
    return _document(doc, roots, lines)


def _document(doc: Document, roots: list[Any], lines: list[str]) -> Document:
    """Build one spec document's values from composed roots (from either composer)."""
    path = doc.path
    # A document with nothing in it ("---" alone) composes to an empty null scalar.
    roots = [r for r in roots if r is not None and not _is_empty(r)]
    if not roots:
        raise InvalidSpec(path, [Problem("", "the file holds no YAML data (it is empty, blank or only "
                                         "comments); a spec is a mapping starting with 'id:'")], lines)
    if len(roots) > 1:
        mark = roots[1].start_mark
        raise InvalidSpec(path, [Problem("", f"the file holds {len(roots)} YAML documents separated by '---'; "
                                         "give one spec per file", mark.line + 1, mark.column + 1)], lines)
    root = roots[0]
    builder = _Builder(doc)
    try:
        doc.data = builder.build(root, ())
    except _Stop:
        pass
    if builder.problems:
        raise InvalidSpec(path, builder.problems, lines)
    if not isinstance(doc.data, dict):
        kind = ("a list" if isinstance(doc.data, list) else "a single null value" if doc.data is None
                else f"a single value ({_short(doc.data)})")
        raise InvalidSpec(path, [Problem("", f"the document is {kind}; a spec is a mapping of keys such as "
                                         "'id:', 'title:' and 'design:'", root.start_mark.line + 1,
                                         root.start_mark.column + 1)], lines)
    return doc


def _c_loader() -> Any:
    """A C-accelerated composer (libyaml through PyYAML) resolving plain scalars exactly as the
    YAML 1.2 core schema of the main loader does, or ``None`` when libyaml is not available."""
    try:
        import yaml as pyyaml
        from ruamel.yaml.resolver import implicit_resolvers
    except ImportError:  # pragma: no cover - PyYAML is a dependency
        return None
    if not getattr(pyyaml, "__with_libyaml__", False):  # pragma: no cover - wheels ship libyaml
        return None

    class CoreResolver(pyyaml.resolver.BaseResolver):
        yaml_implicit_resolvers: dict[str, list[Any]] = {}

    for versions, tag, regexp, first in implicit_resolvers:
        if (1, 2) in versions:
            CoreResolver.add_implicit_resolver(tag, regexp, first)

    from yaml._yaml import CParser

    class CoreComposer(CParser, CoreResolver):  # composes nodes only: nothing is constructed
        def __init__(self, stream: Any) -> None:
            CParser.__init__(self, stream)
            CoreResolver.__init__(self)

    return CoreComposer, pyyaml.YAMLError


_C = _c_loader()
#: Texts holding these go the main way: line breaks in YAML 1.1 (libyaml) but ordinary characters
#: in YAML 1.2, and the tab, which libyaml accepts where the main loader explains it as a mistake.
_YAML_1_1_BREAKS = ("\x85", "\u2028", "\u2029")
_MAIN_WAY_CHARACTERS = (*_YAML_1_1_BREAKS, "\t")
#: Where a text may hold the non-specific tag ``!`` (``! 64``, ``!<!> 64``): libyaml resolves such a
#: scalar as if it were plain (64 the number); the main loader reads it as text, as YAML 1.2 says.
_NON_SPECIFIC_TAG_RE = re.compile(r"(?:^|(?<=[\s\[{,]))!(?:<!>)?(?=[\s,\[\]{}]|$)", re.MULTILINE)
#: Whether :func:`load_bytes_fast` has a C parser to use.
FAST_LOADER = _C is not None


def load_bytes_fast(raw: bytes, path: str, *, main_way_problems: bool = True) -> Document:
    """:func:`load_bytes` through libyaml when available (about 20 times faster; used for the spec
    files ``check`` reads and the many historical versions it reads from git). The values and
    positions are the same as :func:`load_bytes` gives: libyaml's marks count lines and characters
    as ruamel's do. Only a clean document is built from libyaml's nodes; any text with a problem
    (one the C parser rejects, a tag, a duplicate key, a cap reached ...) is loaded again the main
    way, so its messages and positions are exactly the main loader's. So is a text with a ``%YAML``
    directive, a YAML 1.1 line break (U+0085, U+2028, U+2029, which libyaml counts as lines) or a
    tab (libyaml accepts tabs where the main loader explains them as a mistake).

    ``main_way_problems=False`` (for historical versions, where only whether a version is valid
    matters) reports the problems found in libyaml's nodes as they are, without loading again."""
    if _C is None or len(raw) > MAX_FILE_BYTES or _DIRECTIVE_BYTES_RE.search(raw) is not None:
        return load_bytes(raw, path)
    text = _decode(raw, path)
    if any(ch in text for ch in (_MAIN_WAY_CHARACTERS if main_way_problems else _YAML_1_1_BREAKS)) \
            or _NON_SPECIFIC_TAG_RE.search(text):
        return load_text(text, path)
    composer_class, yaml_error = _C
    composer = composer_class(text)
    try:
        roots = []
        while composer.check_node():
            roots.append(composer.get_node())
    except (yaml_error, RecursionError, ValueError):
        return load_text(text, path)
    finally:
        composer.dispose()
    doc = Document(path=path, data=None, source=text)
    try:
        return _document(doc, roots, doc.source_lines)
    except InvalidSpec:
        if not main_way_problems:
            raise
        return load_text(text, path)
    except Exception:  # noqa: BLE001 - a node shape libyaml builds differently (a recursive alias): the main way
        return load_text(text, path)


def peek_scalars(raw: bytes, paths: tuple[tuple[str, ...], ...]) -> dict[tuple[str, ...], str] | None:
    """The text of the scalars at ``paths`` (mapping keys from the top), read with libyaml's event
    parser and stopping as soon as all are found: far cheaper than a full load for the many
    historical versions whose only interesting values are an id and a date.

    Returns ``None`` when it cannot answer with certainty (no C parser, a syntax error, an alias or
    a complex key on the way); the caller then loads the text in full. A dict without some of
    ``paths`` means the whole text was read and holds no scalar there.
    """
    if _C is None or len(raw) > MAX_FILE_BYTES or _DIRECTIVE_BYTES_RE.search(raw) is not None:
        return None
    import yaml as pyyaml

    wanted = set(paths)
    found: dict[tuple[str, ...], str] = {}
    parser = _C[0](raw)
    # stack of [path, is_mapping, expecting_key, current_key]
    stack: list[list[Any]] = []
    try:
        while len(found) < len(wanted):
            event = parser.get_event()
            if event is None or isinstance(event, pyyaml.StreamEndEvent):
                break
            if isinstance(event, (pyyaml.StreamStartEvent, pyyaml.DocumentStartEvent, pyyaml.DocumentEndEvent)):
                continue
            top = stack[-1] if stack else None
            if top is not None and top[1] and top[2]:  # a mapping key
                if not isinstance(event, pyyaml.ScalarEvent):
                    if isinstance(event, pyyaml.MappingEndEvent):
                        stack.pop()
                        _value_done(stack)
                        continue
                    return None
                top[3], top[2] = event.value, False
                continue
            path = (*top[0], top[3]) if top is not None and top[1] else (*top[0], "[]") if top else ()
            if isinstance(event, pyyaml.ScalarEvent):
                if path in wanted and path not in found:
                    found[path] = event.value
                _value_done(stack)
            elif isinstance(event, pyyaml.AliasEvent):
                if path in wanted:
                    return None
                _value_done(stack)
            elif isinstance(event, pyyaml.MappingStartEvent):
                stack.append([path, True, True, None])
            elif isinstance(event, pyyaml.SequenceStartEvent):
                stack.append([path, False, False, None])
            elif isinstance(event, (pyyaml.MappingEndEvent, pyyaml.SequenceEndEvent)):
                stack.pop()
                _value_done(stack)
    except (_C[1], RecursionError, ValueError):
        return None
    finally:
        parser.dispose()
    return found


def _value_done(stack: list[list[Any]]) -> None:
    if stack and stack[-1][1]:
        stack[-1][2] = True


def _is_empty(node: Node) -> bool:
    return node.id == "scalar" and str(node.tag) == _CORE + "null" and node.value == ""


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return text[0] if text else type(exc).__name__


def _reader_problem(exc: ReaderError, text: str) -> Problem:
    position = exc.position if isinstance(exc.position, int) else 0
    line, column = _line_column(text, min(position, len(text)))
    code = exc.character if isinstance(exc.character, int) else 0
    return Problem("", f"the file contains the control character U+{code:04X}, which YAML does not allow in "
                   "text; remove it (or write it as an escape inside double quotes)", line, column)


def _mark(mark: Any) -> tuple[int | None, int | None]:
    return (mark.line + 1, mark.column + 1) if mark is not None else (None, None)


_BRACKETS = {"flow sequence": ("list", "[", "]"), "flow mapping": ("mapping", "{", "}")}


def _syntax_problem(exc: MarkedYAMLError, lines: list[str]) -> Problem:
    """Explain ruamel's scanner/parser errors in plain words, at the line a person must fix."""
    problem = str(exc.problem or "").strip()
    context = str(exc.context or "").strip()
    line, column = _mark(exc.problem_mark or exc.context_mark)
    start_line, start_column = _mark(exc.context_mark)
    here = f"line {start_line}, column {start_column}"
    if isinstance(exc, _LimitError):
        return Problem("", problem, line, column)
    if isinstance(exc, MaxDepthExceededError):
        return Problem("", f"nested more than {MAX_DEPTH} levels deep; a spec is at most a few levels deep",
                       line, column)
    found = re.match(r"found character '(.*)' that cannot start any token", problem)
    if found and found.group(1) in ("\\t", "\t"):
        return Problem("", "a tab character here; YAML indents and separates with spaces only, replace the tab "
                       "with spaces", line, column)
    if found:
        char = found.group(1)
        return Problem("", f"a plain value cannot start with {char!r}; put the value in quotes, e.g. "
                       f"\"{char}...\"", line, column)
    if "unexpected end of stream" in problem and "quoted scalar" in context:
        return Problem("", f"the quoted text that starts here (line {start_line}) is never closed; add the "
                       "closing quote", start_line, start_column)
    for kind, (word, opening, closing) in _BRACKETS.items():
        if kind in context:
            got = re.search(r"but got (.*)$", problem)
            after = f" (found {got.group(1)} instead)" if got else ""
            return Problem("", f"the {word} opened with '{opening}' at {here} is not closed with "
                           f"'{closing}'{after}", line, column)
    if problem.startswith("expected <block end>") and "block mapping" in context:
        if "'-'" in problem:
            return Problem("", "a list item ('- ') here does not belong to the mapping above it; put it under "
                           "a key, indented", line, column)
        return Problem("", f"this line is indented differently from the keys of the mapping at {here}; keys "
                       "of one mapping must start in the same column", line, column)
    if problem.startswith("expected <block end>") and "block collection" in context:
        return Problem("", f"this line is indented differently from the list at {here}; items of one list must "
                       "start in the same column", line, column)
    if problem == "mapping values are not allowed here" and line is not None:
        indent, previous = _continued(lines, line)
        if previous is not None:
            return Problem("", f"this line is indented more than the key on line {previous}, so YAML reads it "
                           f"as more text of that key's value; start it in the same column as the key above",
                           line, indent + 1)
    if problem == "mapping values are not allowed here":
        return Problem("", "unexpected ':' here; text containing ': ' must be quoted (e.g. title: \"Dose: "
                       "low\"), and a nested mapping must start on a new, indented line", line, column)
    if problem == "could not find expected ':'":
        return Problem("", f"the key at {here} has no ':' after it (or is longer than 1024 characters); write "
                       "'key: value'", start_line, start_column)
    escape = re.match(r"found unknown escape character '(.*)'", problem)
    if escape:
        return Problem("", f"unknown escape '\\{escape.group(1)}' in double-quoted text; use single quotes, or "
                       "write '\\\\' for a backslash", line, column)
    alias = re.match(r"found undefined alias '(.*)'", problem)
    if alias:
        return Problem("", f"the alias *{alias.group(1)} refers to no anchor &{alias.group(1)} defined before it",
                       line, column)
    if problem.startswith("found non-comment content after document end marker"):
        return Problem("", "text after the document end marker '...'; remove it", line, column)
    if problem.startswith("found duplicate anchor"):
        return Problem("", "an anchor name is defined twice", line, column)
    text = f"YAML syntax error: {problem or context or 'the text is not valid YAML'}"
    if context and problem and start_line is not None:
        text += f" ({context} at {here})"
    if line is not None and 1 <= line <= len(lines) and "\t" in lines[line - 1]:
        text += "; this line contains a tab character: YAML indents with spaces only"
    return Problem("", text, line, column)


def _continued(lines: list[str], line: int) -> tuple[int, int | None]:
    """(indent of ``line``, number of the line above it) when ``line`` is indented deeper than a
    preceding ``key: value`` line, which makes YAML read it as a continuation of that value."""
    if not 1 <= line <= len(lines):
        return 0, None
    text = lines[line - 1]
    indent = len(text) - len(text.lstrip(" "))
    for number in range(line - 1, 0, -1):
        above = lines[number - 1]
        if not above.strip() or above.lstrip().startswith("#"):
            continue
        above_indent = len(above) - len(above.lstrip(" "))
        key_value = re.match(r"^\s*(- )?[^\s:#][^:#]*:[ ]+[^\s#]", above)
        if indent > above_indent and key_value:
            return indent, number
        return indent, None
    return indent, None


def dump(data: Any, header: str = "") -> str:
    """Write plain data as block-style YAML text (used by ``new`` and round-trip tests)."""
    yaml = YAML(typ="rt", pure=True)
    yaml.default_flow_style = False
    yaml.indent(mapping=2, sequence=4, offset=2)
    yaml.width = 100
    buffer = io.StringIO()
    if header:
        buffer.write(header)
    yaml.dump(data, buffer)
    return buffer.getvalue()
