"""Exact sample size, power and minimum detectable effect for planned experiments.

>>> from registry.power import sample_size
>>> sample_size("two-sample-t", difference=4.0, sd=5.0)
SampleSize(test='two-sample-t', n_per_group=26, n_total=52, achieved_power=0.8075)
"""

from __future__ import annotations

from typing import Any

from pydantic import ValidationError

from .base import MAX_N, DesignBase, EventsOnly, Family, InfeasibleDesign
from .catalog import FAMILIES, UnknownFamily, family_names, get_family
from .results import PowerAtN, SampleSize
from .solve import enrolment, minimum_effect, power_at, solve_sample_size

__all__ = [
    "sample_size",
    "power",
    "design_from_params",
    "InvalidDesign",
    "InfeasibleDesign",
    "EventsOnly",
    "UnknownFamily",
    "Family",
    "DesignBase",
    "SampleSize",
    "PowerAtN",
    "FAMILIES",
    "MAX_N",
    "family_names",
    "get_family",
    "enrolment",
    "minimum_effect",
    "power_at",
    "solve_sample_size",
]

#: Keyword spellings accepted by the Python API and ``prespec size`` for design-level fields.
_ALIASES = {"ratio": "allocation_ratio"}


class InvalidDesign(ValueError):
    """Parameters that do not describe a valid design; lists every problem."""

    def __init__(self, test: str, messages: list[str]) -> None:
        self.test = test
        self.messages = messages
        super().__init__(f"invalid {test} design: " + "; ".join(messages))


def design_from_params(test: str, **params: Any) -> DesignBase:
    """Build a validated design from flat keyword parameters.

    Design-level names (``alpha``, ``power``, ``alternative``, ``ratio`` or
    ``allocation_ratio``, ``attrition`` ...) go to the design; the rest to its effect.
    """
    family = get_family(test)
    model = type(family).design_model
    design_fields = set(model.model_fields) - {"effect", "test"}
    effect_fields = set(family.effect_model.model_fields)
    top: dict[str, Any] = {"test": test}
    effect: dict[str, Any] = {}
    unknown: list[str] = []
    for key, value in params.items():
        if value is None:
            continue
        key = _ALIASES.get(key, key)
        if key in design_fields:
            top[key] = value
        elif key in effect_fields:
            effect[key] = value
        else:
            unknown.append(key)
    if unknown:
        allowed = sorted(design_fields | effect_fields | set(_ALIASES))
        raise InvalidDesign(test, [_unknown_parameter(key, allowed) for key in unknown])
    top["effect"] = effect
    try:
        return model.model_validate(top)
    except ValidationError as exc:
        from ..validation import messages_for

        raise InvalidDesign(test, messages_for(exc, model)) from None


def _unknown_parameter(key: str, allowed: list[str]) -> str:
    from .synonyms import parameter_hint

    return f"unknown parameter {key!r} for this design{parameter_hint(key, allowed)} Allowed: {', '.join(allowed)}"


def sample_size(test: str, **params: Any) -> SampleSize:
    """Smallest analysable n per group reaching the target power for design family ``test``.

    >>> sample_size("two-sample-t", d=0.8).n_per_group
    26
    """
    return solve_sample_size(design_from_params(test, **params))


def power(test: str, n: int, **params: Any) -> PowerAtN:
    """Power at ``n`` analysable units per group, with the minimum detectable effect there.

    >>> round(power("two-sample-t", 64, d=0.5).power, 4)
    0.8015
    """
    return power_at(design_from_params(test, **params), n)
