"""Wilcoxon-Mann-Whitney rank-sum test for two groups: by efficiency, or by Noether's formula."""

from __future__ import annotations

import math

import numpy as np
from pydantic import field_validator
from scipy import special
from .lazy import stats  # loaded on first use

from .base import DesignBase, Family, locked
from .fields import out_of_range
from .rank_efficiency import RankShift, standardized_sample, superiority_shift, t_equivalent_n
from .two_sample_t import TwoSampleT

__all__ = ["MannWhitney", "MannWhitneyEffect"]

_SUPERIORITY = "P(Y>X) - 1/2"


class MannWhitneyEffect(RankShift):
    """A shift with its SD (or ``d``) and the assumed ``distribution``; or ``p_superiority``,
    the probability that a unit of group 2 has a higher outcome than a unit of group 1."""

    p_superiority: float | None = locked(
        default=None,
        description="Instead of a shift: P(Y > X), the probability that a group 2 unit scores higher than a "
        "group 1 unit, in (0, 1), not 0.5 (Noether's formula; needs no distribution).",
    )

    @field_validator("p_superiority")
    @classmethod
    def _probability(cls, value: float | None) -> float | None:
        if value is None:
            return value
        if not 0 < value < 1:
            raise ValueError(out_of_range("p_superiority", "(0, 1)", value))
        if value == 0.5:
            raise ValueError("p_superiority must not be 0.5: that is no difference between the groups")
        return value

    def _other_scale_given(self) -> bool:
        if self.p_superiority is None:
            return False
        if self.difference is not None or self.sd is not None or self.d is not None:
            raise ValueError("give either p_superiority, or a shift (difference with sd, or d), not both")
        return True


class MannWhitney(Family):
    """Sample size of the Wilcoxon-Mann-Whitney test, two ways.

    *By efficiency* (a shift with ``d`` or ``difference`` and ``sd``): the rank test with
    ``n`` units per group is worth a two-sample t-test with ``floor(n x ARE)``, so
    ``n = ceil(n_t / ARE)`` where ``n_t`` is the exact t-test n and ARE the asymptotic relative
    efficiency for the assumed ``distribution`` (3/pi normal, pi^2/9 logistic, 1.5 Laplace,
    1 uniform). ARE is a large-sample result: in small samples it is approximate, so check the
    size by simulation with the real test.

    *By Noether's formula* (``p_superiority`` = P(Y > X)): with ``N = n1 + n2`` and
    ``c = n1 / N``, power is ``Phi(sqrt(12 c (1 - c) N) |P - 1/2| - z_a)``, so
    ``N = (z_a + z_b)^2 / (12 c (1 - c) (P - 1/2)^2)``.

    Either way power is 0 where the exact test cannot reach ``alpha`` (``2 / C(n1 + n2, n1)``
    two-sided).

    References: Noether, G. E. (1987). Sample size determination for some common nonparametric
    tests. *Journal of the American Statistical Association*, 82(398), 645-647. Lehmann, E. L.
    (1975). *Nonparametrics: Statistical Methods Based on Ranks*, ch. 2. San Francisco: Holden-Day.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("mann-whitney", d=0.5)
    SampleSize(test='mann-whitney', n_per_group=68, n_total=136, achieved_power=0.8015)
    >>> sample_size("mann-whitney", p_superiority=0.64)
    SampleSize(test='mann-whitney', n_per_group=67, n_total=134, achieved_power=0.8015)
    """

    name = "mann-whitney"
    exact = False
    verify_by_simulation = True
    title = "Wilcoxon-Mann-Whitney rank-sum test"
    method = ("t-test n divided by the asymptotic relative efficiency for the assumed distribution, "
              "or Noether's formula from P(Y > X)")
    reference = (
        "Noether, G. E. (1987). Sample size determination for some common nonparametric tests. Journal of the "
        "American Statistical Association, 82(398), 645-647; Lehmann, E. L. (1975). Nonparametrics: Statistical "
        "Methods Based on Ranks. San Francisco: Holden-Day."
    )
    symbol = "d"
    unit = "per group"
    groups = 2
    min_n = 3
    effect_model = MannWhitneyEffect
    example = {"difference": 4.0, "sd": 5.0, "distribution": "normal"}
    distributions = ("normal", "logistic", "laplace", "uniform")

    def effect_size(self, design: DesignBase) -> float:
        effect = design.effect
        if effect.p_superiority is not None:
            return effect.p_superiority - 0.5
        return effect.standardized()

    def symbol_for(self, design: DesignBase) -> str:
        return _SUPERIORITY if design.effect.p_superiority is not None else "d"

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        es = self.effect_size(design) if effect_size is None else effect_size
        n1 = np.asarray(n, dtype=float)
        n2 = np.ceil(design.allocation_ratio * n1 - 1e-9)
        if design.effect.p_superiority is not None:
            share = n1 / (n1 + n2)
            mean = np.sqrt(12 * share * (1 - share) * (n1 + n2)) * es
            z_alpha = stats.norm.isf(design.alpha / (2 if design.alternative == "two-sided" else 1))
            if design.alternative == "two-sided":
                power = stats.norm.cdf(np.abs(mean) - z_alpha)
            elif design.alternative == "greater":
                power = stats.norm.cdf(mean - z_alpha)
            else:
                power = stats.norm.cdf(-mean - z_alpha)
        else:
            n_t = np.maximum(t_equivalent_n(n1, design.effect.efficiency), 2)
            power = TwoSampleT().power(design, n_t, es)
        return np.where(self._attainable(design, n1, n2), power, 0.0)

    @staticmethod
    def _attainable(design: DesignBase, n1: np.ndarray, n2: np.ndarray) -> np.ndarray:
        """Whether the exact test's smallest p-value, ``tails / C(n1 + n2, n1)``, is within alpha."""
        tails = 2 if design.alternative == "two-sided" else 1
        log_arrangements = special.gammaln(n1 + n2 + 1) - special.gammaln(n1 + 1) - special.gammaln(n2 + 1)
        return math.log(tails) - log_arrangements <= math.log(design.alpha)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        if design.effect.p_superiority is None:
            return super().approximate_n(design, effect_size) / design.effect.efficiency
        z_alpha = stats.norm.isf(design.alpha / (2 if design.alternative == "two-sided" else 1))
        share = 1 / (1 + design.allocation_ratio)
        total = (z_alpha + stats.norm.ppf(design.power)) ** 2 / (12 * share * (1 - share) * effect_size**2)
        return total * share

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        effect = design.effect
        if effect.p_superiority is not None:
            return {"p_superiority": 0.5 + effect_size}
        if effect.sd is not None:
            return {"difference": effect_size * effect.sd, "d": effect_size}
        return {"d": effect_size}

    def notes(self, design: DesignBase) -> tuple[str, ...]:
        if design.effect.p_superiority is not None:
            return ("Noether's formula is a large-sample normal approximation; check small sizes by simulation",)
        return (design.effect.caveat(f"a {design.effect.distribution} outcome"),)

    def doubts(self, design: DesignBase) -> tuple[str, ...]:
        slow = design.effect.slow_convergence() if design.effect.p_superiority is None else ""
        return (slow,) if slow else ()

    def default_distribution(self, design: DesignBase) -> str:
        return design.effect.distribution

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        """Both groups drawn from ``distribution`` (SD 1), group 2 shifted; scipy's rank-sum test."""
        if distribution not in self.distributions:
            raise ValueError(f"the mann-whitney simulator offers {', '.join(self.distributions)}; got {distribution!r}")
        effect = design.effect
        if effect.p_superiority is not None:
            shift = superiority_shift(distribution, effect.p_superiority)
        else:
            shift = effect.standardized()
        n2 = self.group_sizes(design, n)[1]
        control = standardized_sample(distribution, rng, (reps, n))
        treated = standardized_sample(distribution, rng, (reps, n2)) + shift
        p = stats.mannwhitneyu(treated, control, axis=1, alternative=design.alternative).pvalue
        return p < design.alpha
