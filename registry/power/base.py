"""The interface every design family implements, and the assumptions they share.

A design family is one module holding a :class:`Family` subclass and the pydantic
model of its ``design.effect`` block. :mod:`registry.power.catalog` registers it in
one line; from there it appears in the spec model, the JSON Schema, ``check`` and
``size`` without further wiring.
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from typing import Any, ClassVar, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

__all__ = [
    "Alternative",
    "DesignBase",
    "EffectBase",
    "Family",
    "InfeasibleDesign",
    "MAX_N",
    "fraction_validator",
    "locked",
    "free",
]

Alternative = Literal["two-sided", "greater", "less"]

#: The largest sample size per group prespec will report; beyond it a design is infeasible.
MAX_N = 100_000_000


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


class InfeasibleDesign(ValueError):
    """A request that has no meaningful answer (wrong tail, zero effect, power <= alpha, too large n)."""

    def __init__(self, message: str, field: str = "design") -> None:
        super().__init__(message)
        self.field = field
        self.message = message


def _percent_hint(value: float, name: str) -> str:
    if 1 < value <= 100:
        return f", which looks like a percent: did you mean {value / 100:g}?"
    return ""


def fraction_validator(name: str, *, low_closed: bool = False):
    """Validator for a probability-like field in (0, 1) (or [0, 1) with ``low_closed``)."""

    def check(value: float) -> float:
        if not math.isfinite(value):
            raise ValueError(f"{name} must be a finite number; got {value!r}")
        ok = (0 <= value < 1) if low_closed else (0 < value < 1)
        if not ok:
            interval = "[0, 1)" if low_closed else "(0, 1)"
            raise ValueError(f"{name} must be in {interval}; got {value!r}{_percent_hint(value, name)}")
        return value

    return check


class EffectBase(BaseModel):
    """Base of every family's ``design.effect`` block: unknown keys are errors."""

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)


class DesignBase(BaseModel):
    """Assumptions common to all design families (``design:`` in a spec)."""

    model_config = ConfigDict(extra="forbid", strict=True, allow_inf_nan=False)

    test: str = locked(description="Design family: which test the primary analysis uses.")
    alternative: Alternative = locked(
        default="two-sided",
        description="Direction of the alternative hypothesis: two-sided, greater (increase) or less (decrease).",
    )
    alpha: float = locked(default=0.05, description="Significance level (type I error rate), in (0, 1).")
    power: float = locked(default=0.8, description="Target power (1 - type II error rate), in (0, 1), above alpha.")
    allocation_ratio: float = locked(
        default=1.0, gt=0, le=100, description="Two-group designs: n2 / n1 (group 2 gets ceil(ratio x n1))."
    )
    attrition: float = locked(
        default=0.0,
        description="Expected fraction of enrolled units lost before analysis, in [0, 1); "
        "enrolment = ceil(n / (1 - attrition)).",
    )
    effect_rationale: str | None = locked(
        default=None,
        max_length=5000,
        description="Why this effect is the smallest of practical or biological interest.",
    )
    variability_source: str | None = locked(
        default=None,
        max_length=5000,
        description="Where the variability (SD) assumption comes from, e.g. earlier control animals.",
    )

    @field_validator("alpha", "power")
    @classmethod
    def _open_fraction(cls, value: float, info: Any) -> float:
        return fraction_validator(info.field_name)(value)

    @field_validator("attrition")
    @classmethod
    def _attrition_fraction(cls, value: float) -> float:
        return fraction_validator("attrition", low_closed=True)(value)

    @model_validator(mode="after")
    def _power_above_alpha(self) -> "DesignBase":
        if self.power <= self.alpha:
            raise ValueError(
                f"power ({self.power:g}) must be greater than alpha ({self.alpha:g}); "
                "a test has power alpha even when there is no effect"
            )
        return self

    @property
    def family(self) -> "Family":
        from .catalog import get_family

        return get_family(self.test)


class Family(ABC):
    """One design family: power at n, the smallest n reaching a target, and effect conversion.

    Subclasses set the class attributes and implement :meth:`effect_size` and :meth:`power`;
    the generic solver in :mod:`registry.power.solve` does the rest.
    """

    #: ``design.test`` value.
    name: ClassVar[str]
    #: Human title, e.g. "Two-sample t-test (pooled variance)".
    title: ClassVar[str]
    #: One line on how power is computed.
    method: ClassVar[str]
    #: Full published reference for the method.
    reference: ClassVar[str]
    #: Symbol of the standardized effect size ("d", "f", "h", ...).
    symbol: ClassVar[str] = "d"
    #: What ``n_per_group`` counts for this family.
    unit: ClassVar[str] = "per group"
    #: Number of groups ``n_per_group`` applies to, unless :meth:`group_sizes` says otherwise.
    groups: ClassVar[int] = 1
    #: The pydantic model of ``design.effect``.
    effect_model: ClassVar[type[EffectBase]]
    #: Smallest analysable n per group the method is defined for.
    min_n: ClassVar[int] = 2
    #: Whether power never decreases with n (False for exact discrete tests).
    monotone: ClassVar[bool] = True
    #: An illustrative ``design.effect`` block for ``prespec new`` templates.
    example: ClassVar[dict[str, Any]] = {}
    #: Set by the catalog: the spec's design model for this family.
    design_model: ClassVar[type[DesignBase]]

    @abstractmethod
    def effect_size(self, design: DesignBase) -> float:
        """The signed standardized effect size from the design's natural-unit inputs."""

    @abstractmethod
    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        """Power at each analysable n (per group; vectorized), at ``effect_size`` or the design's."""

    @abstractmethod
    def simulate(
        self, design: DesignBase, n: int, reps: int, rng: np.random.Generator, distribution: str = "normal"
    ) -> np.ndarray:
        """Simulate ``reps`` experiments with ``n`` analysable units (group 1), analyse each with the
        family's test, and return a boolean array: whether H0 was rejected at ``design.alpha``.

        ``distribution`` names the outcome's shape (``normal``; families may offer more, such as
        ``lognormal`` or ``counts``) and raises ``ValueError`` for one they do not offer.
        """

    #: Outcome distributions :meth:`simulate` offers.
    distributions: ClassVar[tuple[str, ...]] = ("normal",)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        """A normal-approximation start for the integer search."""
        from scipy.stats import norm

        z_alpha = norm.isf(design.alpha / (2 if design.alternative == "two-sided" else 1))
        z_beta = norm.ppf(design.power)
        per = (z_alpha + z_beta) ** 2 / max(effect_size**2, 1e-300)
        return per * (1 + 1 / design.allocation_ratio) if self.groups == 2 else per

    def group_sizes(self, design: DesignBase, n: int) -> tuple[int, ...]:
        """Analysable size of each group when group 1 has ``n``."""
        if self.groups == 2:
            return (n, math.ceil(design.allocation_ratio * n - 1e-9))
        return (n,) * self.groups

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        """Express a standardized effect in the design's natural units where it has them."""
        return {self.symbol: effect_size}

    def check_direction(self, design: DesignBase, effect_size: float) -> None:
        """Refuse a zero effect or a one-sided alternative pointing the wrong way."""
        if effect_size == 0 or not math.isfinite(effect_size):
            raise InfeasibleDesign(
                f"the effect size is {effect_size!r}: no sample size can detect a zero difference", "design.effect"
            )
        if design.alternative == "greater" and effect_size < 0:
            raise InfeasibleDesign(
                f"alternative 'greater' tests for an increase, but the effect is negative ({self.symbol} = "
                f"{effect_size:.4g}); use 'less' or check the sign of the difference",
                "design.alternative",
            )
        if design.alternative == "less" and effect_size > 0:
            raise InfeasibleDesign(
                f"alternative 'less' tests for a decrease, but the effect is positive ({self.symbol} = "
                f"{effect_size:.4g}); use 'greater' or check the sign of the difference",
                "design.alternative",
            )
