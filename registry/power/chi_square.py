"""Chi-square tests of goodness of fit or of association, on Cohen's w."""

from __future__ import annotations

import math

import numpy as np
from .lazy import stats  # loaded on first use

from .base import DesignBase, EffectBase, Family, locked
from .noncentral_f import chi_square_power, required_noncentrality
from .restrictions import require_no_allocation_ratio, require_two_sided

__all__ = ["ChiSquare", "ChiSquareEffect"]


class ChiSquareEffect(EffectBase):
    """Cohen's ``w`` and the test's degrees of freedom ``df``."""

    w: float = locked(gt=0, description="Cohen's w = sqrt(sum((p1 - p0)^2 / p0)) over the cells, above 0.")
    df: int = locked(ge=1, le=10000, description="Degrees of freedom: cells - 1 (goodness of fit) or "
                                                 "(rows - 1)(columns - 1) (contingency table).")


class ChiSquare(Family):
    """Power of Pearson's chi-square test on ``N`` units (goodness of fit or contingency table).

    Under H1 the statistic is approximately noncentral chi-square with ``df`` and
    ``lambda = w^2 N``, where Cohen's ``w = sqrt(sum_i (p1_i - p0_i)^2 / p0_i)`` over the cells
    (for a table, ``p0`` is the product of the margins). Power is ``P(chi2(df, lambda) > c)`` with
    ``c`` the upper ``alpha`` point of the central chi-square: a large-sample approximation. The
    test has no direction: only two-sided. ``n`` is the total number of units.

    Reference: Cohen, J. (1988). *Statistical Power Analysis for the Behavioral Sciences*
    (2nd ed.), chapter 7 (chi-square tests for goodness of fit and contingency tables).
    Hillsdale, NJ: Lawrence Erlbaum.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("chi-square", w=0.3, df=2)
    SampleSize(test='chi-square', n_per_group=108, n_total=108, achieved_power=0.8037)
    """

    name = "chi-square"
    exact = False  # the noncentral chi-square is the large-sample distribution of the statistic
    title = "Chi-square test (goodness of fit or contingency table)"
    undirected = "chi-square"
    method = "noncentral chi-square approximation, lambda = w^2 N"
    reference = (
        "Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences (2nd ed.), chapter 7. "
        "Hillsdale, NJ: Lawrence Erlbaum."
    )
    symbol = "w"
    unit = "units"
    groups = 1
    min_n = 2
    effect_model = ChiSquareEffect
    example = {"w": 0.3, "df": 2}
    distributions = ("multinomial",)

    def effect_size(self, design: DesignBase) -> float:
        require_two_sided(design, self)
        require_no_allocation_ratio(design, self)
        return design.effect.w

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        w = self.effect_size(design) if effect_size is None else effect_size
        n = np.atleast_1d(np.asarray(n, dtype=float))
        return chi_square_power(w**2 * n, design.effect.df, design.alpha)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        return required_noncentrality(design.effect.df, design.alpha, design.power) / effect_size**2

    def simulate(self, design, n, reps, rng, distribution="multinomial"):  # type: ignore[override]
        """Goodness of fit over ``df + 1`` equally likely cells under H0; under H1 one cell gains
        ``a = w / sqrt(df)`` of the mass taken evenly from all (``p1 = (1 - a) p0 + a e1``, whose w
        is the design's), so it needs ``w <= sqrt(df)``."""
        w, df = design.effect.w, design.effect.df
        cells = df + 1
        shift = w / math.sqrt(df)
        if shift > 1:
            raise ValueError(f"the simulator's goodness-of-fit model allows w up to sqrt(df) = {math.sqrt(df):.4g}; "
                             f"got w = {w!r}")
        null = np.full(cells, 1 / cells)
        alternative = (1 - shift) * null
        alternative[0] += shift
        counts = rng.multinomial(n, alternative / alternative.sum(), size=reps)
        expected = n * null
        statistic = np.sum((counts - expected) ** 2 / expected, axis=1)
        return statistic > stats.chi2.isf(design.alpha, df)

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        return {"w": effect_size}
