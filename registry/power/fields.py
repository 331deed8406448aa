"""Field constructors that mark every spec field as locked (design-defining) or free, and the
shared wording for a value outside its range."""

from __future__ import annotations

from typing import Any

from pydantic import Field

__all__ = ["locked", "free", "out_of_range"]


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


def out_of_range(name: str, interval: str, value: float) -> str:
    """The message for a fraction outside its interval, spotting values written as percents.

    >>> out_of_range("alpha", "(0, 1)", 5.0)
    'alpha must be in (0, 1); 5 looks like a percent, did you mean 0.05?'
    >>> out_of_range("power", "(0, 1)", -0.8)
    'power must be in (0, 1); got -0.8'
    """
    if 1 < value <= 100:
        return f"{name} must be in {interval}; {value:g} looks like a percent, did you mean {value / 100:g}?"
    return f"{name} must be in {interval}; got {value!r}"
