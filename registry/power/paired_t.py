"""Paired t-test: a one-sample t-test on within-pair differences."""

from __future__ import annotations

import math

from pydantic import model_validator

from .base import EffectBase, locked
from .mean_difference import _require_difference_or_d
from .one_sample_t import OneSampleT

__all__ = ["PairedT", "PairedDifference"]


class PairedDifference(EffectBase):
    """The mean within-pair ``difference`` with the ``sd`` of the differences, or with the
    two conditions' ``sd1``, ``sd2`` and their ``correlation``; or a standardized ``d``
    (mean difference over the SD of differences)."""

    difference: float | None = locked(default=None, description="Mean within-pair difference, in outcome units.")
    sd: float | None = locked(default=None, gt=0, description="SD of the within-pair differences.")
    sd1: float | None = locked(default=None, gt=0, description="SD of the outcome in condition 1 (with sd2 and correlation).")
    sd2: float | None = locked(default=None, gt=0, description="SD of the outcome in condition 2.")
    correlation: float | None = locked(
        default=None, gt=-1, lt=1, description="Correlation between the paired measurements, in (-1, 1)."
    )
    d: float | None = locked(default=None, description="Standardized effect: mean difference / SD of differences.")

    @model_validator(mode="after")
    def _consistent(self) -> "PairedDifference":
        parts = [self.sd1, self.sd2, self.correlation]
        if any(p is not None for p in parts) and not all(p is not None for p in parts):
            raise ValueError("sd1, sd2 and correlation go together: give all three, or sd of the differences")
        if self.sd is not None and self.sd1 is not None:
            raise ValueError("give either sd (of the differences) or sd1, sd2 and correlation, not both")
        _require_difference_or_d(self, self.sd is not None or self.sd1 is not None,
                                 "sd (of the differences, or sd1, sd2 and correlation)")
        return self

    def sd_of_differences(self) -> float | None:
        if self.sd is not None:
            return self.sd
        if self.sd1 is None:
            return None
        assert self.sd2 is not None and self.correlation is not None
        return math.sqrt(self.sd1**2 + self.sd2**2 - 2 * self.correlation * self.sd1 * self.sd2)

    def standardized(self) -> float:
        if self.d is not None:
            return self.d
        assert self.difference is not None
        return self.difference / self.sd_of_differences()

    def natural_scale(self) -> tuple[float, float]:
        """``(difference, SD of differences)``; ``(d, 1)`` when the effect is given as d."""
        if self.d is not None:
            return self.d, 1.0
        assert self.difference is not None
        sd = self.sd_of_differences()
        assert sd is not None
        return self.difference, sd


class PairedT(OneSampleT):
    """Power of the paired t-test on ``n`` pairs: ``df = n - 1``, ``ncp = d_z * sqrt(n)``.

    With two SDs and their correlation, the SD of differences is
    ``sqrt(sd1^2 + sd2^2 - 2 * rho * sd1 * sd2)``.

    Reference: Cohen, J. (1988). *Statistical Power Analysis for the Behavioral
    Sciences* (2nd ed.), section 2.3.5 (paired samples). Hillsdale, NJ: Lawrence Erlbaum.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("paired-t", difference=10, sd1=30, sd2=30, correlation=0.7).n_per_group
    45
    """

    name = "paired-t"
    title = "Paired t-test"
    method = "exact power from the noncentral t distribution on the within-pair differences, df = n - 1"
    unit = "pairs"
    effect_model = PairedDifference
    # The simulated outcome is the within-pair difference. Skewed shapes are not offered: a skewed
    # paired design is defined by each condition's distribution and their dependence, which the
    # effect block (differences only, or two SDs and a correlation) does not pin down.
    distributions = ("normal",)
    example = {"difference": 2.0, "sd": 4.0}

    def natural_effect(self, design, effect_size):  # type: ignore[override]
        sd = design.effect.sd_of_differences()
        if sd is not None:
            return {"difference": effect_size * sd, "d": effect_size}
        return {"d": effect_size}
