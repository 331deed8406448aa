"""Turn pydantic's validation errors into messages a lab user can act on.

Each message names the field, quotes the bad value with ``!r``, says what is allowed
and, for an unknown key, suggests the nearest allowed one. Positions come from the
:class:`~registry.yamlio.Document`, so every problem points at its line and column.
"""

from __future__ import annotations

import math
import re
import types
import typing
import unicodedata
from typing import Any, Union

from pydantic import BaseModel, ValidationError

from .model import Spec
from .power.catalog import UnknownFamily, family_names
from .power.synonyms import ALTERNATIVE_SYNONYMS
from .power.synonyms import hint as synonym_hint
from .power.synonyms import parameter_hint
from .problems import NO_VALUE, InvalidSpec, Problem
from .yamlio import Document

__all__ = ["validate_document", "messages_for", "allowed_keys"]

_UNIT_RE = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:e[-+]?\d+)?)\s*(%|[^\W\d_].*|[°µ/].*)$", re.IGNORECASE)
#: Fields holding a fraction, where "5%" means 0.05.
_FRACTION_FIELDS = ("alpha", "power", "attrition", "oversize_margin")
_YAML11_BOOLS = ("yes", "no", "on", "off", "y", "n")
#: What a field of each pydantic error kind expects, for "has no value" messages.
_EXPECTED = {
    "float_type": "a number", "float_parsing": "a number", "decimal_type": "a number", "finite_number": "a number",
    "int_type": "a whole number", "int_parsing": "a whole number", "int_from_float": "a whole number",
    "string_type": "text", "str_type": "text", "bool_type": "true or false", "bool_parsing": "true or false",
    "list_type": "a list", "tuple_type": "a list", "date_type": "a date (YYYY-MM-DD)",
    "date_parsing": "a date (YYYY-MM-DD)", "model_type": "a mapping", "model_attributes_type": "a mapping",
    "dict_type": "a mapping", "literal_error": "one of the listed values",
}


def _strip_tags(loc: tuple[Any, ...], model: type[BaseModel]) -> tuple[Any, ...]:
    """pydantic puts the discriminator value into the location of a tagged union; drop it."""
    out: list[Any] = []
    current: Any = model
    for part in loc:
        members = _union_members(current)
        if members is not None and isinstance(part, str) and part in members:
            current = members[part]
            continue
        out.append(part)
        current = _child(current, part)
    return tuple(out)


def _unwrap(annotation: Any) -> Any:
    while True:
        origin = typing.get_origin(annotation)
        if origin is typing.Annotated:
            annotation = typing.get_args(annotation)[0]
            continue
        if origin in (Union, types.UnionType):
            args = [a for a in typing.get_args(annotation) if a is not type(None)]
            if len(args) == 1:
                annotation = args[0]
                continue
        return annotation


def _union_members(annotation: Any) -> dict[str, type[BaseModel]] | None:
    annotation = _unwrap(annotation)
    if typing.get_origin(annotation) not in (Union, types.UnionType):
        return None
    members: dict[str, type[BaseModel]] = {}
    for arg in typing.get_args(annotation):
        if isinstance(arg, type) and issubclass(arg, BaseModel) and "test" in arg.model_fields:
            tag = typing.get_args(arg.model_fields["test"].annotation)
            if tag:
                members[tag[0]] = arg
    return members or None


def _child(current: Any, part: Any) -> Any:
    current = _unwrap(current)
    if current is None:
        return None
    if isinstance(part, int):
        if typing.get_origin(current) in (list, tuple):
            args = typing.get_args(current)
            return args[0] if args else None
        return None
    if isinstance(current, type) and issubclass(current, BaseModel):
        info = current.model_fields.get(part)
        return info.annotation if info is not None else None
    return None


def allowed_keys(model: type[BaseModel], loc: tuple[Any, ...], data: Any = None) -> list[str]:
    """The keys a mapping at ``loc`` (YAML path, without union tags) may hold."""
    current: Any = model
    node = data
    for part in loc:
        current = _unwrap(current)
        members = _union_members(current)
        if members is not None:
            tag = node.get("test") if isinstance(node, dict) else None
            current = members.get(tag) if tag in members else None
            if current is None:
                return []
        current = _child(current, part)
        node = node.get(part) if isinstance(node, dict) else node[part] if isinstance(node, list) and isinstance(
            part, int) and part < len(node) else None
    current = _unwrap(current)
    members = _union_members(current)
    if members is not None:
        tag = node.get("test") if isinstance(node, dict) else None
        current = members.get(tag)
    if isinstance(current, type) and issubclass(current, BaseModel):
        return list(current.model_fields)
    return []


def _dotted(loc: tuple[Any, ...]) -> str:
    out = ""
    for part in loc:
        out += f"[{part}]" if isinstance(part, int) else ("." if out else "") + str(part)
    return out


def _name(loc: tuple[Any, ...]) -> str:
    for part in reversed(loc):
        if isinstance(part, str):
            return part
    return "value"


def _number_hint(value: Any, name: str) -> str:
    """Why a text value is not a number, when it nearly is one: quotes, a unit, a percent sign."""
    if not isinstance(value, str):
        return ""
    text = value.strip()
    try:
        float(text)
    except ValueError:
        pass
    else:
        if not text.isascii():  # float() reads other scripts' digits too; YAML numbers use 0-9 only
            ascii_form = "".join(str(unicodedata.decimal(ch)) if unicodedata.decimal(ch, None) is not None else ch
                                 for ch in text)
            return f" (numbers are written with the digits 0-9: write {ascii_form})"
        return f" (a number in quotes is text: write {text} without the quotes)"
    match = _UNIT_RE.match(text)
    if not match:
        return ""
    number, unit = match.group(1), match.group(2).strip()
    if unit == "%" and name in _FRACTION_FIELDS:
        return f"; write it as a fraction without '%' ({float(number) / 100:g} for {text})"
    if unit == "%":
        return (f"; write the number alone ({number}); if the outcome is measured in percent, put '%' in "
                "outcomes.primary.unit")
    return (f"; write the number alone ({number}) without the unit {unit!r}: the unit belongs in "
            "outcomes.primary.unit")


def _data_at(data: Any, loc: tuple[Any, ...]) -> Any:
    for part in loc:
        if isinstance(data, dict) and part in data:
            data = data[part]
        elif isinstance(data, list) and isinstance(part, int) and 0 <= part < len(data):
            data = data[part]
        else:
            return None
    return data


def _refine(loc: tuple[Any, ...], message: str, kind: str, data: Any) -> tuple[Any, ...]:
    """Point a problem at the exact key: ``design.test`` for a family, ``design.power`` for a rule
    about power that a model-level validator reports on the whole ``design`` mapping."""
    if kind in ("union_tag_invalid", "union_tag_not_found"):
        return loc + ("test",)
    if kind in ("value_error", "assertion_error"):
        here = _data_at(data, loc)
        first = re.match(r"(\w+)\b", message)
        if isinstance(here, dict) and first and first.group(1) in here:
            return loc + (first.group(1),)
    return loc


def _message(error: dict[str, Any], loc: tuple[Any, ...], model: type[BaseModel], data: Any) -> str:
    kind = error["type"]
    name = _name(loc)
    value = error.get("input")
    ctx = error.get("ctx") or {}
    if kind == "missing":
        return f"{name} is required but missing; add '{name}: ...'"
    if kind == "extra_forbidden":
        allowed = allowed_keys(model, loc[:-1], data)
        hint = parameter_hint(loc[-1], allowed)
        listing = f" Allowed here: {', '.join(allowed)}." if allowed else ""
        return f"unknown key {_short(loc[-1])}{hint}{listing}"
    if kind == "union_tag_invalid":
        tag = _data_at(data, loc + ("test",))
        known = ", ".join(family_names())
        if not isinstance(tag, str):
            return f"test must name a design family as text; got {_short(tag)}. Known families: {known}"
        return str(UnknownFamily(tag if len(tag) <= 80 else tag[:77] + "..."))
    if kind == "union_tag_not_found":
        return f"test is required but missing: name the design family, one of {', '.join(family_names())}"
    if kind in ("value_error", "assertion_error"):
        message = str(ctx.get("error", error["msg"]))
        message = re.sub(r"^(Value|Assertion) error, ", "", message)
        if message.startswith("must ") or message.startswith("is "):
            return f"{name} {message}"
        return message
    if value is None and kind in _EXPECTED:
        return f"{name} has no value; write {_EXPECTED[kind]} after '{name}:'"
    if kind in ("float_type", "float_parsing", "int_parsing", "decimal_type"):
        what = "a whole number" if kind == "int_parsing" else "a number"
        return f"{name} must be {what}; got {_short(value)}{_number_hint(value, name)}"
    if kind in ("int_type", "int_from_float"):
        if isinstance(value, float) and not math.isfinite(value):
            return f"{name} must be a whole number; got {value!r}"
        if isinstance(value, float) and value.is_integer():
            return f"{name} must be a whole number; got {value!r} (write {int(value)} without the decimal point)"
        if isinstance(value, float):
            return f"{name} must be a whole number; got {value!r}, which has a fractional part"
        return f"{name} must be a whole number; got {_short(value)}{_number_hint(value, name)}"
    if kind == "finite_number":
        return f"{name} must be a finite number; got {value!r}"
    if kind in ("greater_than", "greater_than_equal", "less_than", "less_than_equal"):
        words = {"greater_than": "greater than", "greater_than_equal": "at least",
                 "less_than": "less than", "less_than_equal": "at most"}[kind]
        bound = next(iter(ctx.values()))
        bound_text = f"{bound:,}" if isinstance(bound, int) else f"{bound:g}"
        return f"{name} must be {words} {bound_text}; got {_short(value)}"
    if kind == "literal_error":
        expected = ctx.get("expected", "")
        options = re.findall(r"'([^']*)'", expected)
        synonyms = ALTERNATIVE_SYNONYMS if loc and loc[-1] == "alternative" else None
        return f"{name} must be one of {expected}; got {_short(value)}{synonym_hint(value, options, synonyms)}"
    if kind in ("string_type", "str_type"):
        return f"{name} must be text; got {_short(value)} (put it in quotes if it is meant as text)"
    if kind == "string_too_short":
        return f"{name} must not be empty"
    if kind == "string_too_long":
        return f"{name} is {len(value):,} characters long; at most {ctx.get('max_length'):,} are allowed"
    if kind in ("bool_type", "bool_parsing"):
        hint = (" (YAML 1.2 reads yes/no/on/off as text)"
                if isinstance(value, str) and value.lower() in _YAML11_BOOLS else "")
        return f"{name} must be true or false; got {_short(value)}{hint}"
    if kind in ("list_type", "tuple_type"):
        return f"{name} must be a list; got {_short(value)}"
    if kind == "too_short":
        return f"{name} must have at least {ctx.get('min_length')} item(s)"
    if kind == "too_long":
        return f"{name} has too many items; at most {ctx.get('max_length')}"
    if kind in ("model_type", "model_attributes_type", "dict_type"):
        keys = allowed_keys(model, loc, data)
        listing = f" with keys {', '.join(keys)}" if keys else ""
        return f"{name} must be a mapping{listing}; got {_short(value)}"
    if kind in ("date_type", "date_parsing", "date_from_datetime_parsing", "date_from_datetime_inexact"):
        return f"{name} must be a date written YYYY-MM-DD; got {_short(value)}"
    return f"{name}: {error['msg']}; got {_short(value)}"


def _short(value: Any) -> str:
    """A value as the spec writes it, quoted when text, cut at 80 characters with any quote closed.

    >>> _short(True), _short(None), _short([1, "a"]), _short("x" * 100)[-6:], _short({"a": "b" * 100})[-4:]
    ('true', 'null', "[1, 'a']", "xx...'", 'b...')
    """
    if isinstance(value, bool):
        return "true" if value else "false"
    if value is None:
        return "null"
    if isinstance(value, str):
        text = "'" + value.replace("'", "''") + "'"  # YAML's single-quoted style
        return text if len(text) <= 80 else text[:76] + "...'"
    if isinstance(value, (list, tuple)):  # YAML's flow style
        text = "[" + ", ".join(_short(v) for v in value) + "]"
    elif isinstance(value, dict):
        text = "{" + ", ".join(f"{k}: {_short(v)}" for k, v in value.items()) + "}"
    else:
        text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


def _shorten_quotes(message: str) -> str:
    """Cut long quoted values inside messages written by model validators."""
    return re.sub(r"'([^'\n]{72})[^'\n]{8,}'", r"'\1...'", message)


def _problems(exc: ValidationError, model: type[BaseModel], data: Any, doc: Document | None) -> list[Problem]:
    problems: list[Problem] = []
    seen: set[tuple[str, str]] = set()
    for error in exc.errors(include_url=False):
        loc = _strip_tags(tuple(error["loc"]), model)
        message = _shorten_quotes(_message(error, loc, model, data))
        loc = _refine(loc, message, error["type"], data)
        field = _dotted(loc)
        if (field, message) in seen:
            continue
        seen.add((field, message))
        line = column = None
        if doc is not None and error["type"] in ("missing", "union_tag_not_found"):
            # A missing key has no text: point at the key of the mapping that lacks it, if any.
            parent = loc[:-1]
            if parent:
                line, column = doc.position(parent, key=True)
        elif doc is not None:
            line, column = doc.position(loc, key=error["type"] == "extra_forbidden")
        value = error.get("input", NO_VALUE) if error["type"] != "missing" else NO_VALUE
        problems.append(Problem(field, message, line, column, value))
    return problems


def messages_for(exc: ValidationError, model: type[BaseModel], data: Any = None) -> list[str]:
    """``field: message`` strings for a validation error outside any file (Python API, CLI)."""
    out = []
    for problem in _problems(exc, model, data, None):
        name = problem.field.rsplit(".", 1)[-1]
        plain = not problem.field or problem.message.startswith(name + " ")
        out.append(problem.message if plain else f"{problem.field}: {problem.message}")
    return out


def validate_document(doc: Document) -> Spec:
    """Validate a loaded document against :class:`Spec`; raise :class:`InvalidSpec` with every problem."""
    try:
        return Spec.model_validate(doc.data)
    except ValidationError as exc:
        raise InvalidSpec(doc.path, _problems(exc, Spec, doc.data, doc), doc.source_lines) from None
