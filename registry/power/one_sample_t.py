"""One-sample t-test of a mean against a fixed value."""

from __future__ import annotations

import numpy as np
from .lazy import stats  # loaded on first use

from .base import DesignBase, Family
from .mean_difference import MeanDifference
from .noncentral_t import t_test_power
from .shapes import SHAPES, baseline_mean, draw

__all__ = ["OneSampleT"]


class OneSampleT(Family):
    """Power of the one-sample t-test: ``df = n - 1``, ``ncp = d * sqrt(n)``.

    Reference: Cohen, J. (1988). *Statistical Power Analysis for the Behavioral
    Sciences* (2nd ed.), ch. 2, section 2.3.4 (one-sample case). Hillsdale, NJ: Lawrence Erlbaum.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("one-sample-t", d=0.5)
    SampleSize(test='one-sample-t', n_per_group=34, n_total=34, achieved_power=0.8078)
    """

    name = "one-sample-t"
    title = "One-sample t-test"
    method = "exact power from the noncentral t distribution, df = n - 1"
    reference = (
        "Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences (2nd ed.), "
        "chapter 2. Hillsdale, NJ: Lawrence Erlbaum."
    )
    symbol = "d"
    unit = "units"
    groups = 1
    effect_model = MeanDifference
    example = {"difference": 2.0, "sd": 4.0}
    distributions = SHAPES

    def effect_size(self, design: DesignBase) -> float:
        return design.effect.standardized()

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        es = self.effect_size(design) if effect_size is None else effect_size
        n = np.asarray(n, dtype=float)
        return t_test_power(es * np.sqrt(n), n - 1, design.alpha, design.alternative)

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        """Draw ``n`` outcomes with mean ``baseline + difference`` and SD ``sd`` (the shape from
        :mod:`registry.power.shapes`), test them against ``baseline`` with scipy's one-sample t-test."""
        difference, sd = design.effect.natural_scale()
        null = baseline_mean(design, distribution)
        sample = draw(rng, distribution, np.full(n, null + difference), sd, reps)
        p = stats.ttest_1samp(sample, null, axis=1, alternative=design.alternative).pvalue
        return p < design.alpha

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        if design.effect.sd is not None:
            return {"difference": effect_size * design.effect.sd, "d": effect_size}
        return {"d": effect_size}
