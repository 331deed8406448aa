"""The canonical content of a spec: its locked fields as canonical JSON, and that JSON's SHA-256.

Comments, key order, layout and number spelling (0.05 vs 0.050, 1 vs 1.0) never change
the hash; any change of meaning in a locked field does. docs/reviewer-guide.md shows how
to recompute it by hand.
"""

from __future__ import annotations

import hashlib
import json
from datetime import date
from typing import TYPE_CHECKING, Any

from pydantic import BaseModel

if TYPE_CHECKING:
    from .model import Spec

__all__ = ["locked_view", "canonical_json", "content_hash", "is_locked_field"]


def is_locked_field(model: type[BaseModel], name: str) -> bool:
    extra = model.model_fields[name].json_schema_extra
    return bool(isinstance(extra, dict) and extra.get("x-locked"))


def _normal(value: Any) -> Any:
    if isinstance(value, BaseModel):
        return locked_view(value)
    if isinstance(value, (list, tuple)):
        return [_normal(v) for v in value]
    if isinstance(value, dict):
        return {str(k): _normal(v) for k, v in value.items()}
    if isinstance(value, bool) or value is None or isinstance(value, str):
        return value
    if isinstance(value, float):
        return int(value) if value.is_integer() and abs(value) < 2**53 else value
    if isinstance(value, int):
        return value
    if isinstance(value, date):
        return value.isoformat()
    return str(value)


def locked_view(model: BaseModel) -> dict[str, Any]:
    """The locked fields of a validated model (recursively), defaults filled in."""
    cls = type(model)
    return {name: _normal(getattr(model, name)) for name in cls.model_fields if is_locked_field(cls, name)}


def canonical_json(spec: Spec) -> str:
    """Sorted keys, no whitespace, UTF-8 text, integral numbers written as integers."""
    return json.dumps(locked_view(spec), sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False)


def content_hash(spec: Spec) -> str:
    """SHA-256 (hex) of :func:`canonical_json`."""
    return hashlib.sha256(canonical_json(spec).encode("utf-8")).hexdigest()
