"""Two-sample t-test with pooled variance and an allocation ratio."""

from __future__ import annotations

import math

import numpy as np
from .lazy import stats  # loaded on first use

from .base import DesignBase, Family
from .mean_difference import MeanDifference
from .noncentral_t import t_test_power
from .shapes import SHAPES, baseline_mean, draw

__all__ = ["TwoSampleT"]


class TwoSampleT(Family):
    """Power of the pooled two-sample t-test.

    With ``n1`` and ``n2 = ceil(r * n1)`` analysable units, the statistic follows a
    noncentral t with ``df = n1 + n2 - 2`` and ``ncp = d / sqrt(1/n1 + 1/n2)``.

    Reference: Cohen, J. (1988). *Statistical Power Analysis for the Behavioral
    Sciences* (2nd ed.), ch. 2. Hillsdale, NJ: Lawrence Erlbaum.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("two-sample-t", d=0.5)
    SampleSize(test='two-sample-t', n_per_group=64, n_total=128, achieved_power=0.8015)
    """

    name = "two-sample-t"
    title = "Two-sample t-test (pooled variance)"
    method = "exact power from the noncentral t distribution, df = n1 + n2 - 2"
    reference = (
        "Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences (2nd ed.), "
        "chapter 2. Hillsdale, NJ: Lawrence Erlbaum."
    )
    symbol = "d"
    unit = "per group"
    groups = 2
    effect_model = MeanDifference
    example = {"difference": 4.0, "sd": 5.0}
    distributions = SHAPES
    cluster_means = True

    def effect_size(self, design: DesignBase) -> float:
        return design.effect.standardized()

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        es = self.effect_size(design) if effect_size is None else effect_size
        n1 = np.asarray(n, dtype=float)
        n2 = np.ceil(design.allocation_ratio * n1 - 1e-9)
        ncp = es / np.sqrt(1 / n1 + 1 / n2)
        return t_test_power(ncp, n1 + n2 - 2, design.alpha, design.alternative)

    def cluster_power(self, design: DesignBase, clusters: np.ndarray, effect_size: float) -> np.ndarray:
        """The pooled t-test on cluster means: ``k1`` and ``k2 = ceil(r k1)`` clusters, each mean with
        variance ``sigma^2 (icc + (1 - icc) / m)``, so ``df = k1 + k2 - 2`` and
        ``ncp = d / sqrt((icc + (1 - icc) / m)(1/k1 + 1/k2))`` (Donner & Klar 2000, ch. 5); exact for
        normal outcomes and clusters of equal size."""
        assert design.cluster is not None
        k1 = np.asarray(clusters, dtype=float)
        k2 = np.ceil(design.allocation_ratio * k1 - 1e-9)
        ncp = effect_size / np.sqrt(design.cluster.mean_variance * (1 / k1 + 1 / k2))
        return t_test_power(ncp, k1 + k2 - 2, design.alpha, design.alternative)

    def label(self, design: DesignBase) -> str:
        if design.cluster is not None and design.cluster.size_cv > 0:
            return "approximation for unequal cluster sizes"
        return "exact"

    def simulate_clusters(self, design: DesignBase, clusters: int, reps: int, rng) -> np.ndarray:
        """The pooled t-test on cluster means, ``k1 = clusters`` and ``k2 = ceil(r k1)`` clusters.

        Normal outcomes with total SD ``sd`` and intracluster correlation ``icc``: cluster ``j`` of
        group ``g`` has the mean ``mu_g + sd (sqrt(icc) b_j + sqrt((1 - icc) / m_j) e_j)`` of its
        ``m_j`` units, ``b_j`` and ``e_j`` standard normal (a random cluster effect and the mean of
        ``m_j`` unit errors). Every ``m_j = m`` when ``size_cv`` is 0; otherwise ``m_j`` is a gamma
        variable with mean ``m`` and coefficient of variation ``size_cv`` rounded to a whole number of
        at least 1 (a common model of varying cluster size: Eldridge, S. M., Ashby, D. & Kerry, S.
        (2006). Sample size for cluster randomized trials: effect of coefficient of variation of
        cluster size and analysis method. *International Journal of Epidemiology* 35(5), 1292-1300).
        Each replicate is analysed with scipy's pooled t-test on the unweighted cluster means."""
        cluster = design.cluster
        assert cluster is not None
        difference, sd = design.effect.natural_scale()
        k2 = self.cluster_groups(design, clusters)[1]
        means = []
        for count, shift in ((clusters, 0.0), (k2, difference)):  # one call per group and component
            if cluster.size_cv > 0:
                shape = 1 / cluster.size_cv**2
                sizes = np.maximum(1.0, np.rint(rng.gamma(shape, cluster.size / shape, size=(reps, count))))
            else:
                sizes = np.full((reps, count), float(cluster.size))
            effect = rng.standard_normal(size=(reps, count))
            error = rng.standard_normal(size=(reps, count))
            means.append(shift + sd * (np.sqrt(cluster.icc) * effect + np.sqrt((1 - cluster.icc) / sizes) * error))
        p = stats.ttest_ind(means[1], means[0], axis=1, equal_var=True, alternative=design.alternative).pvalue
        return p < design.alpha

    def cluster_groups(self, design: DesignBase, clusters: int) -> tuple[int, int]:
        """Clusters in each group when group 1 has ``clusters``."""
        return clusters, math.ceil(design.allocation_ratio * clusters - 1e-9)

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        """Group 1: ``n`` outcomes with mean ``baseline``; group 2: ``ceil(ratio * n)`` with mean
        ``baseline + difference``; both with SD ``sd`` and the shape from :mod:`registry.power.shapes`.
        Each replicate is analysed with scipy's pooled two-sample t-test (group 2 minus group 1)."""
        difference, sd = design.effect.natural_scale()
        base = baseline_mean(design, distribution)
        n2 = self.group_sizes(design, n)[1]
        control = draw(rng, distribution, np.full(n, base), sd, reps)  # one call per group: common
        treated = draw(rng, distribution, np.full(n2, base + difference), sd, reps)  # random numbers across n
        p = stats.ttest_ind(treated, control, axis=1, equal_var=True, alternative=design.alternative).pvalue
        return p < design.alpha

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        if design.effect.sd is not None:
            return {"difference": effect_size * design.effect.sd, "d": effect_size}
        return {"d": effect_size}
