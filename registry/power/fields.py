"""Field constructors that mark every spec field as locked (design-defining) or free."""

from __future__ import annotations

from typing import Any

from pydantic import Field

__all__ = ["locked", "free"]


def locked(**kwargs: Any) -> Any:
    """A field that defines the design: changing it after data collection starts is drift."""
    extra = dict(kwargs.pop("json_schema_extra", None) or {})
    extra["x-locked"] = True
    return Field(json_schema_extra=extra, **kwargs)


def free(**kwargs: Any) -> Any:
    """A field that may change at any time (status, notes, contacts)."""
    extra = dict(kwargs.pop("json_schema_extra", None) or {})
    extra["x-locked"] = False
    return Field(json_schema_extra=extra, **kwargs)
