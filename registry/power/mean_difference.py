"""The effect block shared by the t-test families: a raw difference with its SD, or Cohen's d."""

from __future__ import annotations

import math

from pydantic import model_validator

from .base import EffectBase, locked

__all__ = ["MeanDifference"]


class MeanDifference(EffectBase):
    """``difference`` with ``sd`` (natural units), or a standardized ``d``: give one of the two."""

    difference: float | None = locked(
        default=None, description="Smallest difference of interest, in outcome units (signed for one-sided tests)."
    )
    sd: float | None = locked(default=None, gt=0, description="Standard deviation of the outcome, in outcome units.")
    d: float | None = locked(default=None, description="Standardized effect size (Cohen's d), instead of difference + sd.")

    @model_validator(mode="after")
    def _one_way_to_state_the_effect(self) -> "MeanDifference":
        _require_difference_or_d(self, self.sd is not None, "sd")
        return self

    def standardized(self) -> float:
        if self.d is not None:
            return self.d
        assert self.difference is not None and self.sd is not None
        return self.difference / self.sd

    def natural_scale(self) -> tuple[float, float]:
        """``(difference, sd)`` in outcome units; ``(d, 1)`` (SD units) when the effect is given as d."""
        if self.d is not None:
            return self.d, 1.0
        assert self.difference is not None and self.sd is not None
        return self.difference, self.sd


def _require_difference_or_d(effect: EffectBase, have_spread: bool, spread: str) -> None:
    """Shared rule: d alone, or difference with a spread; never both, never half."""
    difference = getattr(effect, "difference")
    d = getattr(effect, "d")
    if d is not None and (difference is not None or have_spread):
        raise ValueError(f"give either d, or difference with {spread}, not both")
    if d is None:
        if difference is None and not have_spread:
            raise ValueError(f"give the effect as difference with {spread} (outcome units) or as d (standardized)")
        if difference is None:
            raise ValueError(f"difference is missing: {spread} alone does not state an effect")
        if not have_spread:
            raise ValueError(f"{spread} is missing: a difference needs the outcome's {spread} to be standardized")
    for name in ("difference", "d"):
        value = getattr(effect, name)
        if value is not None and value == 0:
            raise ValueError(f"{name} must not be 0: no sample size can detect a zero difference")
        if value is not None and not math.isfinite(value):
            raise ValueError(f"{name} must be a finite number")
