"""Two independent proportions compared by Fisher's exact test, with exact power."""

from __future__ import annotations

import math

import numpy as np
from pydantic import field_validator, model_validator

from .base import DesignBase, EffectBase, Family, fraction_validator, locked
from .binary_tables import EXACT_CELLS, enumeration_cells, exact_power, rejects
from .cluster_proportions import ClusterProportions
from .two_proportions import cohens_h, proportion_for_h, tails_for, z_test_tails

__all__ = ["FisherExact", "FisherPair"]


class FisherPair(EffectBase):
    """Expected proportions in the control (``p1``) and treatment (``p2``) groups."""

    p1: float = locked(description="Expected proportion with the outcome in group 1 (control), in (0, 1).")
    p2: float = locked(description="Expected proportion in group 2 (treatment), in (0, 1); differs from p1.")

    @field_validator("p1", "p2")
    @classmethod
    def _fraction(cls, value: float, info) -> float:
        return fraction_validator(info.field_name)(value)

    @model_validator(mode="after")
    def _distinct(self) -> "FisherPair":
        if self.p1 == self.p2:
            raise ValueError(f"p1 and p2 are both {self.p1!r}: no sample size can detect a zero difference")
        return self


class FisherExact(ClusterProportions, Family):
    """Exact power of Fisher's exact test comparing two independent proportions.

    Group 1 (control, ``p1``) has ``n1`` units, group 2 (treatment, ``p2``) has ``n2 = ceil(r n1)``.
    The test conditions on the total number of units with the outcome; one-sided it is the
    hypergeometric tail, two-sided it sums the probabilities of the tables (with that total) no more
    probable than the one observed, as ``scipy.stats.fisher_exact`` does. Its power is the probability
    of the tables it rejects, summed over every possible pair of counts
    (:mod:`registry.power.binary_tables`), so it is exact; the test is conservative (its actual level is
    below alpha), so it needs more units than the z test. The reported n is the smallest from which every
    larger n (checked well past it) reaches the target. The search starts from the continuity-corrected
    normal formula of Fleiss, Tytun & Ury (1980), a close approximation for Fisher's test.

    The standardized effect is Cohen's ``h = 2 asin sqrt(p2) - 2 asin sqrt(p1)``.

    **Randomised in clusters** (``design.cluster``: litters, cages), Fisher's test on the units would
    ignore the clusters; the analysis is the pooled two-sample t-test on the cluster proportions, as
    for ``two-proportions`` (:class:`registry.power.cluster_proportions.ClusterProportions`), and the
    size is the same.

    References: Fisher, R. A. (1935). The logic of inductive inference. *Journal of the Royal
    Statistical Society*, 98(1), 39-82. Casagrande, J. T., Pike, M. C., & Smith, P. G. (1978). An
    improved approximate formula for calculating sample sizes for comparing two binomial
    distributions. *Biometrics*, 34(3), 483-486. Fleiss, J. L., Tytun, A., & Ury, H. K. (1980).
    A simple approximation for calculating sample sizes for comparing independent proportions.
    *Biometrics*, 36(2), 343-346.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> result = sample_size("fisher-exact", p1=0.1, p2=0.7)
    >>> result.n_per_group, result.start_n, round(result.achieved_power, 4)
    (12, 13, 0.8262)
    """

    name = "fisher-exact"
    title = "Two independent proportions (Fisher's exact test)"
    method = "exact: every possible pair of counts enumerated for Fisher's exact test (conditional on the total)"
    reference = (
        "Fisher, R. A. (1935). The logic of inductive inference. Journal of the Royal Statistical Society, 98(1), "
        "39-82; Casagrande, J. T., Pike, M. C., & Smith, P. G. (1978). An improved approximate formula for "
        "calculating sample sizes for comparing two binomial distributions. Biometrics, 34(3), 483-486; Fleiss, "
        "J. L., Tytun, A., & Ury, H. K. (1980). A simple approximation for calculating sample sizes for comparing "
        "independent proportions. Biometrics, 36(2), 343-346."
    )
    symbol = "h"
    unit = "per group"
    groups = 2
    min_n = 2
    monotone = False
    scan_floor = 0.5
    not_run_with_clusters = "Fisher's exact test on the units, which ignores the clusters, is not the analysis"
    effect_model = FisherPair
    example = {"p1": 0.1, "p2": 0.6}
    distributions = ("binary",)

    def effect_size(self, design: DesignBase) -> float:
        return cohens_h(design.effect.p1, design.effect.p2)

    def _p2(self, design: DesignBase, effect_size: float | None) -> float:
        return design.effect.p2 if effect_size is None else proportion_for_h(design.effect.p1, effect_size)

    def formula(self, design: DesignBase) -> str | None:
        if design.cluster is not None:  # the cluster-level power is its own formula, started from directly
            return None
        return "normal approximation with continuity correction (Fleiss, Tytun & Ury 1980)"

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        p1, p2 = design.effect.p1, self._p2(design, effect_size)
        sizes = np.atleast_1d(np.asarray(n, dtype=float))
        out = np.empty(sizes.shape)
        for i, size in enumerate(sizes.ravel()):
            n1 = int(size)
            n2 = math.ceil(design.allocation_ratio * n1 - 1e-9)
            if enumeration_cells("fisher", n1, n2, p1, p2) > EXACT_CELLS:
                out.flat[i] = self._normal_power(design, n1, n2, p1, p2)
            else:
                out.flat[i] = exact_power("fisher", n1, n2, p1, p2, design.alpha, design.alternative)  # type: ignore
        return out

    def enumeration_cost(self, design: DesignBase, n: float) -> float:
        if design.cluster is not None:  # the cluster-level power enumerates nothing
            return 0.0
        m1 = int(n)
        m2 = math.ceil(design.allocation_ratio * m1 - 1e-9)
        return enumeration_cells("fisher", m1, m2, design.effect.p1, design.effect.p2)

    def _normal_power(self, design: DesignBase, n1: int, n2: int, p1: float, p2: float) -> float:
        """Beyond the enumeration budget: the continuity-corrected z test, which Fisher's test approaches
        in large samples (Yates 1934; Fleiss, Tytun & Ury 1980)."""
        from scipy.special import ndtri

        z = -ndtri(design.alpha / (2 if design.alternative == "two-sided" else 1))
        up, down = z_test_tails(p1, p2, np.array([n1], float), np.array([n2], float), z, True)
        return float(tails_for(up, down, design.alternative)[0])

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        from scipy.special import ndtri

        r = design.allocation_ratio
        z_alpha = -ndtri(design.alpha / (2 if design.alternative == "two-sided" else 1))
        z_beta = ndtri(design.power)
        p1, p2 = design.effect.p1, self._p2(design, effect_size)
        delta = abs(p2 - p1)
        pbar = (p1 + r * p2) / (1 + r)
        n = (z_alpha * math.sqrt((1 + 1 / r) * pbar * (1 - pbar))
             + z_beta * math.sqrt(p1 * (1 - p1) + p2 * (1 - p2) / r)) ** 2 / delta**2  # Fleiss (1981) eq. 3.14
        return n / 4 * (1 + math.sqrt(1 + 2 * (r + 1) / (r * n * delta))) ** 2  # Fleiss, Tytun & Ury (1980)

    def simulate(self, design, n, reps, rng, distribution="binary"):  # type: ignore[override]
        n1, n2 = self.group_sizes(design, n)
        x1 = rng.binomial(n1, design.effect.p1, size=reps)
        x2 = rng.binomial(n2, design.effect.p2, size=reps)
        grid = rejects("fisher", np.arange(n1 + 1), np.arange(n2 + 1), n1, n2, design.alpha, design.alternative)
        return grid[x1, x2]

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        p2 = proportion_for_h(design.effect.p1, effect_size)
        return {"p2": p2, "difference": p2 - design.effect.p1, "h": effect_size}
