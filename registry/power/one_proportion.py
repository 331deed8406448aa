"""One proportion against a fixed value: the exact binomial test."""

from __future__ import annotations

import math

import numpy as np
from pydantic import field_validator, model_validator
from .lazy import stats  # loaded on first use

from .base import DesignBase, EffectBase, Family, fraction_validator, locked
from .restrictions import require_no_allocation_ratio
from .two_proportions import cohens_h, proportion_for_h

__all__ = ["OneProportion", "ProportionVersusNull", "binomial_rejection_bounds"]

_TOLERANCE = 1e-12  # a tail probability within this (relative) of alpha counts as equal to it


class ProportionVersusNull(EffectBase):
    """The null value ``p0`` and the expected proportion ``p``."""

    p0: float = locked(description="Proportion under the null hypothesis, in (0, 1).")
    p: float = locked(description="Expected proportion, in (0, 1); differs from p0.")

    @field_validator("p0", "p")
    @classmethod
    def _fraction(cls, value: float, info) -> float:
        return fraction_validator(info.field_name)(value)

    @model_validator(mode="after")
    def _distinct(self) -> "ProportionVersusNull":
        if self.p0 == self.p:
            raise ValueError(f"p and p0 are both {self.p!r}: no sample size can detect a zero difference")
        return self


def binomial_rejection_bounds(n: np.ndarray, p0: float, alpha: float, alternative: str) -> tuple[np.ndarray, np.ndarray]:
    """Rejection region ``X <= lower`` or ``X >= upper`` of the exact binomial test with ``n`` trials.

    One-sided: the usual tail at level ``alpha``. Two-sided: equal tails, each of probability at
    most ``alpha/2`` under H0 (the test whose p-value is twice the smaller one-sided p-value, the
    test dual to the Clopper-Pearson interval). A side that cannot reject gets ``lower = -1`` or
    ``upper = n + 1``.

    >>> lower, upper = binomial_rejection_bounds(np.array([20]), 0.5, 0.05, "two-sided")
    >>> int(lower[0]), int(upper[0])
    (5, 15)
    """
    n = np.asarray(n, dtype=float)
    tail = alpha / 2 if alternative == "two-sided" else alpha
    limit = tail * (1 + _TOLERANCE)
    lower = np.full(n.shape, -1.0)
    upper = n + 1
    if alternative in ("two-sided", "less"):
        k = stats.binom.ppf(tail, n, p0)  # smallest k with P(X <= k) >= tail
        k = np.where(stats.binom.cdf(k, n, p0) <= limit, k, k - 1)
        lower = np.where(stats.binom.cdf(k, n, p0) <= limit, k, -1.0)
    if alternative in ("two-sided", "greater"):
        k = stats.binom.isf(tail, n, p0)  # smallest k with P(X > k) <= tail
        k = np.where(stats.binom.sf(k - 1, n, p0) <= limit, k, k + 1)  # P(X >= k) <= tail
        upper = np.where(stats.binom.sf(k - 1, n, p0) <= limit, k, n + 1)
    return lower, upper


class OneProportion(Family):
    """Exact power of the binomial test of one proportion against ``p0`` with ``n`` units.

    The rejection region comes from the Binomial(n, p0) distribution (see
    :func:`binomial_rejection_bounds`: one tail of level ``alpha``, or two equal tails of at most
    ``alpha/2`` each); the power is its probability under Binomial(n, p). Because the
    attainable level jumps with n, power is not monotone in n: the reported n is the smallest
    from which every larger n reaches the target, and a note gives the first n that reaches it
    when that is smaller. The standardized effect is Cohen's ``h = 2 asin sqrt(p) - 2 asin sqrt(p0)``.

    References: Clopper, C. J., & Pearson, E. S. (1934). The use of confidence or fiducial limits
    illustrated in the case of the binomial. *Biometrika*, 26(4), 404-413. Chernick, M. R., &
    Liu, C. Y. (2002). The saw-toothed behavior of power versus sample size and software
    solutions: single binomial proportion using exact methods. *The American Statistician*,
    56(2), 149-155. Cohen, J. (1988). *Statistical Power Analysis for the Behavioral Sciences*
    (2nd ed.), chapter 6. Hillsdale, NJ: Lawrence Erlbaum.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> result = sample_size("one-proportion", p0=0.5, p=0.7)
    >>> result
    SampleSize(test='one-proportion', n_per_group=54, n_total=54, achieved_power=0.8368)
    >>> print(result.notes[0])
    exact power is not monotone in n: 54 is the smallest n from which every larger n (checked up to 94) reaches the target power; n = 49 already reaches it (power 0.8100) but some n between fall below
    """

    name = "one-proportion"
    title = "One proportion (exact binomial test)"
    method = "exact power from the binomial distribution; two-sided: equal tails of at most alpha/2"
    reference = (
        "Clopper, C. J., & Pearson, E. S. (1934). The use of confidence or fiducial limits illustrated in the "
        "case of the binomial. Biometrika, 26(4), 404-413; Chernick, M. R., & Liu, C. Y. (2002). The "
        "saw-toothed behavior of power versus sample size and software solutions: single binomial proportion "
        "using exact methods. The American Statistician, 56(2), 149-155."
    )
    symbol = "h"
    unit = "units"
    groups = 1
    min_n = 1
    monotone = False
    effect_model = ProportionVersusNull
    example = {"p0": 0.5, "p": 0.7}
    distributions = ("binary",)

    def effect_size(self, design: DesignBase) -> float:
        require_no_allocation_ratio(design, self)
        return cohens_h(design.effect.p0, design.effect.p)

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        p0 = design.effect.p0
        p = design.effect.p if effect_size is None else proportion_for_h(p0, effect_size)
        n = np.atleast_1d(np.asarray(n, dtype=float))
        lower, upper = binomial_rejection_bounds(n, p0, design.alpha, design.alternative)
        return stats.binom.cdf(lower, n, p) + stats.binom.sf(upper - 1, n, p)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        # Normal approximation to the binomial test (null variance under H0, alternative under H1).
        p0 = design.effect.p0
        p = proportion_for_h(p0, effect_size)
        tails = 2 if design.alternative == "two-sided" else 1
        z_alpha, z_beta = stats.norm.isf(design.alpha / tails), stats.norm.ppf(design.power)
        return (z_alpha * math.sqrt(p0 * (1 - p0)) + z_beta * math.sqrt(p * (1 - p))) ** 2 / (p - p0) ** 2

    def simulate(self, design, n, reps, rng, distribution="binary"):  # type: ignore[override]
        effect = design.effect
        successes = rng.binomial(n, effect.p, size=reps)
        # p-values of the exact test for every simulated count, then the decision at alpha.
        at_most = stats.binom.cdf(successes, n, effect.p0)
        at_least = stats.binom.sf(successes - 1, n, effect.p0)
        if design.alternative == "greater":
            p_value = at_least
        elif design.alternative == "less":
            p_value = at_most
        else:
            p_value = np.minimum(1.0, 2 * np.minimum(at_most, at_least))
        return p_value <= design.alpha * (1 + _TOLERANCE)

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        p = proportion_for_h(design.effect.p0, effect_size)
        return {"p": p, "difference": p - design.effect.p0, "h": effect_size}
