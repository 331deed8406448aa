"""Safe YAML loading that remembers where every value came from.

ruamel.yaml composes the node graph; this module builds plain Python values from it
itself, so no tag can ever construct an object, duplicate keys and alias bombs are
caught, and each key and value keeps its line and column for error messages.
Only the YAML core types are accepted: mappings, sequences, strings, integers,
floats, booleans, null and dates (kept as ISO text for the model to parse).
"""

from __future__ import annotations

import io
import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ruamel.yaml import YAML
from ruamel.yaml.error import MarkedYAMLError, YAMLError
from ruamel.yaml.nodes import Node

from .problems import NO_VALUE, InvalidSpec, Problem

__all__ = [
    "Document",
    "Location",
    "load_text",
    "load_bytes",
    "load_file",
    "load_bytes_fast",
    "peek_scalars",
    "FAST_LOADER",
    "dump",
    "MAX_FILE_BYTES",
    "MAX_NODES",
    "MAX_DEPTH",
]

#: A spec is a page of text; anything larger is not a spec.
MAX_FILE_BYTES = 1_000_000
#: Values built after expanding aliases; bounds memory against "billion laughs".
MAX_NODES = 20_000
#: Nesting depth of mappings and sequences.
MAX_DEPTH = 40

Location = tuple[Any, ...]  # field path: ("design", "effect", "sd") or ("amendments", 0, "date")

_CORE = "tag:yaml.org,2002:"
_SCALAR_TAGS = {_CORE + t for t in ("str", "int", "float", "bool", "null", "timestamp", "binary")}
_INT_RE = re.compile(r"^[-+]?(0|[1-9][0-9_]*)$")


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


class _Builder:
    def __init__(self, doc: Document) -> None:
        self.doc = doc
        self.problems: list[Problem] = []
        self.nodes = 0

    def _problem(self, loc: Location, node: Node, message: str, value: Any = NO_VALUE) -> None:
        mark = node.start_mark
        self.problems.append(Problem(_dotted(loc), message, mark.line + 1, mark.column + 1, value))

    def build(self, node: Node, loc: Location, depth: int = 0) -> Any:
        self.nodes += 1
        if self.nodes == MAX_NODES + 1:
            self._problem(loc, node, f"too many values (more than {MAX_NODES}) once aliases are expanded; "
                          "a spec is plain data, write values out instead of multiplying them with aliases")
        if self.nodes > MAX_NODES:
            return None
        if depth > MAX_DEPTH:
            self._problem(loc, node, f"nested more than {MAX_DEPTH} levels deep; a spec is at most a few levels deep")
            return None
        self.doc.value_positions.setdefault(loc, (node.start_mark.line + 1, node.start_mark.column + 1))
        tag = str(node.tag) if node.tag is not None else ""
        if node.id == "mapping":  # node ids, not classes: the C composer's nodes are of another library
            if tag != _CORE + "map":
                self._problem(loc, node, f"tag {_short_tag(tag)!s} is not allowed; specs hold plain data only "
                              "(mappings, lists, text, numbers, true/false, dates)")
                return None
            return self._mapping(node, loc, depth)
        if node.id == "sequence":
            if tag != _CORE + "seq":
                self._problem(loc, node, f"tag {_short_tag(tag)!s} is not allowed; specs hold plain data only "
                              "(mappings, lists, text, numbers, true/false, dates)")
                return None
            return [self.build(item, loc + (i,), depth + 1) for i, item in enumerate(node.value)]
        assert node.id == "scalar"
        return self._scalar(node, loc, tag)

    def _mapping(self, node: Node, loc: Location, depth: int) -> dict[str, Any]:
        out: dict[str, Any] = {}
        first_seen: dict[str, int] = {}
        for key_node, value_node in node.value:
            self.nodes += 1
            if str(key_node.tag) == _CORE + "merge":
                self._problem(loc, key_node, "merge keys ('<<') are not supported; write the keys out")
                continue
            if key_node.id != "scalar":
                self._problem(loc, key_node, "a key must be plain text, not a list or mapping")
                continue
            key = key_node.value if isinstance(key_node.value, str) else str(key_node.value)
            line = key_node.start_mark.line + 1
            if key in first_seen:
                self._problem(loc + (key,), key_node, f"duplicate key {key!r} (first given on line {first_seen[key]}); "
                              "each key may appear once", key)
                continue
            first_seen[key] = line
            self.doc.key_positions[loc + (key,)] = (line, key_node.start_mark.column + 1)
            out[key] = self.build(value_node, loc + (key,), depth + 1)
        return out

    def _scalar(self, node: Node, loc: Location, tag: str) -> Any:
        text: str = node.value
        if node.style == ">":  # ruamel marks folds in folded scalars with BEL; they are not content
            text = text.replace("\a", "")
        if tag not in _SCALAR_TAGS:
            self._problem(loc, node, f"tag {_short_tag(tag)!s} is not allowed; specs hold plain data only "
                          "(mappings, lists, text, numbers, true/false, dates)")
            return None
        kind = tag[len(_CORE):]
        if kind in ("str", "timestamp"):
            return text
        if kind == "null":
            return None
        if kind == "bool":
            return text.lower() in ("true", "yes", "on", "y")
        if kind == "int":
            return _parse_int(text)
        if kind == "float":
            return _parse_float(text)
        self._problem(loc, node, "binary data is not allowed in a spec")
        return None


def _parse_int(text: str) -> int | float:
    clean = text.replace("_", "")
    try:
        return int(clean, 0)
    except ValueError:
        try:
            return int(clean, 10)
        except ValueError:
            return _parse_float(text)


def _parse_float(text: str) -> float:
    clean = text.replace("_", "").lower()
    if clean in (".nan", "nan"):
        return math.nan
    if clean.lstrip("+-") in (".inf", "inf"):
        return -math.inf if clean.startswith("-") else math.inf
    return float(clean)


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


def _decode(raw: bytes, path: str) -> str:
    if b"\x00" in raw[:8192] and not raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise InvalidSpec(path, [Problem("", "this is a binary file, not a YAML text spec")])
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise InvalidSpec(path, [Problem("", "the file is UTF-16 encoded; save it as UTF-8")])
    if raw.startswith(b"\xef\xbb\xbf"):
        raw = raw[3:]  # a UTF-8 byte-order mark is harmless
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        column = exc.start - (raw.rfind(b"\n", 0, exc.start) + 1) + 1
        raise InvalidSpec(path, [Problem("", f"the file is not valid UTF-8 (byte 0x{raw[exc.start]:02x}); "
                                         "save it as UTF-8 text", line, column)]) from None


def load_bytes(raw: bytes, path: str) -> Document:
    """Parse one spec file's bytes; raise :class:`InvalidSpec` with every problem found."""
    if len(raw) > MAX_FILE_BYTES:
        raise InvalidSpec(path, [Problem("", f"the file is {len(raw):,} bytes; a spec is at most "
                                         f"{MAX_FILE_BYTES:,} bytes")])
    return load_text(_decode(raw, path), path)


def load_file(path: str | Path, display: str | None = None) -> Document:
    """Read and parse a spec file; unreadable files become an :class:`InvalidSpec` too."""
    shown = display or str(path)
    try:
        with open(path, "rb") as handle:
            raw = handle.read(MAX_FILE_BYTES + 1)
    except IsADirectoryError:
        raise InvalidSpec(shown, [Problem("", "is a directory, not a spec file")]) from None
    except OSError as exc:
        raise InvalidSpec(shown, [Problem("", f"cannot be read: {exc.strerror or exc}")]) from None
    return load_bytes(raw, shown)


def load_text(text: str, path: str) -> Document:
    """Parse spec text; one mapping document is expected."""
    doc = Document(path=path, data=None, source=text)
    lines = text.splitlines()
    yaml = YAML(typ="rt", pure=True)
    try:
        roots = list(yaml.compose_all(io.StringIO(text)))
    except MarkedYAMLError as exc:
        raise InvalidSpec(path, [_syntax_problem(exc, lines)], lines) from None
    except RecursionError:
        raise InvalidSpec(path, [Problem("", f"nested too deeply; a spec is at most {MAX_DEPTH} levels deep")],
                          lines) from None
    except YAMLError as exc:
        raise InvalidSpec(path, [Problem("", f"not valid YAML: {exc}")], lines) from None
    return _document(doc, roots, lines)


def _document(doc: Document, roots: list[Any], lines: list[str]) -> Document:
    path = doc.path
    roots = [r for r in roots if r is not None]
    if not roots:
        raise InvalidSpec(path, [Problem("", "the file holds no YAML data (empty, blank or only comments); "
                                         "a spec is a mapping starting with 'id:'")], lines)
    if len(roots) > 1:
        mark = roots[1].start_mark
        raise InvalidSpec(path, [Problem("", f"the file holds {len(roots)} YAML documents; one spec per file, "
                                         "so remove the '---' separators", mark.line + 1, mark.column + 1)], lines)
    root = roots[0]
    builder = _Builder(doc)
    doc.data = builder.build(root, ())
    if builder.problems:
        raise InvalidSpec(path, builder.problems, lines)
    if not isinstance(doc.data, dict):
        kind = "a list" if isinstance(doc.data, list) else f"a single value ({doc.data!r})"
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
#: Whether :func:`load_bytes_fast` has a C parser to use.
FAST_LOADER = _C is not None


def load_bytes_fast(raw: bytes, path: str) -> Document:
    """:func:`load_bytes` through libyaml when available (about 20 times faster; used for the many
    historical versions ``check`` reads from git). The values are the same as :func:`load_bytes`
    gives; any text the C parser rejects, or one with a ``%YAML`` directive, goes the main way."""
    if _C is None or len(raw) > MAX_FILE_BYTES or b"%YAML" in raw:
        return load_bytes(raw, path)
    text = _decode(raw, path)
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
    return _document(doc, roots, doc.source_lines)


def peek_scalars(raw: bytes, paths: tuple[tuple[str, ...], ...]) -> dict[tuple[str, ...], str] | None:
    """The text of the scalars at ``paths`` (mapping keys from the top), read with libyaml's event
    parser and stopping as soon as all are found: far cheaper than a full load for the many
    historical versions whose only interesting values are an id and a date.

    Returns ``None`` when it cannot answer with certainty (no C parser, a syntax error, an alias or
    a complex key on the way); the caller then loads the text in full.
    """
    if _C is None or len(raw) > MAX_FILE_BYTES or b"%YAML" in raw:
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


def _syntax_problem(exc: MarkedYAMLError, lines: list[str]) -> Problem:
    mark = exc.problem_mark or exc.context_mark
    line = mark.line + 1 if mark is not None else None
    column = mark.column + 1 if mark is not None else None
    what = exc.problem or exc.context or "syntax error"
    what = str(what).strip()
    text = f"YAML syntax error: {what}"
    if line is not None and 1 <= line <= len(lines) and "\t" in lines[line - 1][: (column or 1) + 1]:
        text = "a tab character is used for indentation; YAML allows spaces only"
    elif "\t" in what or "'\\t'" in what:
        text = "a tab character is used for indentation; YAML allows spaces only"
    return Problem("", text, line, column)


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
