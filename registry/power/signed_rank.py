"""Wilcoxon signed-rank test on paired differences (or one sample about a fixed value)."""

from __future__ import annotations

import math

import numpy as np
from .lazy import stats  # loaded on first use

from .base import DesignBase, Family, locked
from .rank_efficiency import RankShift, standardized_sample, t_equivalent_n
from .one_sample_t import OneSampleT

__all__ = ["SignedRank", "SignedRankEffect"]


class SignedRankEffect(RankShift):
    """The mean within-pair ``difference`` with the ``sd`` of the differences (or ``d``), and the
    assumed symmetric ``distribution`` of the differences."""

    sd: float | None = locked(
        default=None, gt=0, description="SD of the within-pair differences (of the outcome, for one sample)."
    )


class SignedRank(Family):
    """Sample size of the Wilcoxon signed-rank test by asymptotic relative efficiency.

    The signed-rank test on ``n`` pairs is worth a paired (one-sample) t-test on
    ``floor(n x ARE)`` pairs, so ``n = ceil(n_t / ARE)`` where ``n_t`` is the exact t-test n and
    ARE the asymptotic relative efficiency for the assumed symmetric ``distribution`` of the
    differences (3/pi normal, pi^2/9 logistic, 1.5 Laplace, 1 uniform). ARE is a large-sample
    result: in small samples the size is approximate, so check it by simulation with the real test.
    Power is 0 where the exact test cannot reach ``alpha`` (smallest p-value ``2 / 2^n`` two-sided).

    References: Lehmann, E. L. (1975). *Nonparametrics: Statistical Methods Based on Ranks*,
    ch. 4. San Francisco: Holden-Day. Noether, G. E. (1987). Sample size determination for some
    common nonparametric tests. *Journal of the American Statistical Association*, 82(398), 645-647.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("signed-rank", d=0.5)
    SampleSize(test='signed-rank', n_per_group=36, n_total=36, achieved_power=0.8078)
    """

    name = "signed-rank"
    exact = False
    verify_by_simulation = True
    title = "Wilcoxon signed-rank test (paired or one sample)"
    method = "paired t-test n divided by the asymptotic relative efficiency for the assumed distribution"
    reference = (
        "Lehmann, E. L. (1975). Nonparametrics: Statistical Methods Based on Ranks. San Francisco: Holden-Day; "
        "Noether, G. E. (1987). Sample size determination for some common nonparametric tests. Journal of the "
        "American Statistical Association, 82(398), 645-647."
    )
    symbol = "d"
    unit = "pairs"
    groups = 1
    min_n = 3
    effect_model = SignedRankEffect
    example = {"difference": 2.0, "sd": 4.0, "distribution": "normal"}
    distributions = ("normal", "logistic", "laplace", "uniform")

    def effect_size(self, design: DesignBase) -> float:
        return design.effect.standardized()

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        es = self.effect_size(design) if effect_size is None else effect_size
        n = np.asarray(n, dtype=float)
        n_t = np.maximum(t_equivalent_n(n, design.effect.efficiency), 2)
        power = OneSampleT().power(design, n_t, es)
        tails = 2 if design.alternative == "two-sided" else 1
        attainable = math.log(tails) - n * math.log(2) <= math.log(design.alpha)
        return np.where(attainable, power, 0.0)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        return super().approximate_n(design, effect_size) / design.effect.efficiency

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        if design.effect.sd is not None:
            return {"difference": effect_size * design.effect.sd, "d": effect_size}
        return {"d": effect_size}

    def notes(self, design: DesignBase) -> tuple[str, ...]:
        return (design.effect.caveat(f"{design.effect.distribution} differences"),)

    def doubts(self, design: DesignBase) -> tuple[str, ...]:
        slow = design.effect.slow_convergence()
        return (slow,) if slow else ()

    def default_distribution(self, design: DesignBase) -> str:
        return design.effect.distribution

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        """Differences drawn from ``distribution`` (SD 1) shifted by ``d``; scipy's signed-rank test."""
        if distribution not in self.distributions:
            raise ValueError(f"the signed-rank simulator offers {', '.join(self.distributions)}; got {distribution!r}")
        differences = standardized_sample(distribution, rng, (reps, n)) + design.effect.standardized()
        p = stats.wilcoxon(differences, axis=1, alternative=design.alternative).pvalue
        return p < design.alpha
