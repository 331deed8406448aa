"""Two proportions randomised in clusters: the pooled t-test on the cluster proportions.

The cluster-level analysis of a clustered binary outcome (pups per litter, wells per plate), shared
by the two-group binary families (``two-proportions``, ``fisher-exact``): each cluster's proportion
is one observation, its power approximated by a noncentral t and verified by simulating the test.
"""

from __future__ import annotations

import math
import warnings
from typing import ClassVar

import numpy as np

from .base import DesignBase
from .lazy import stats  # loaded on first use
from .noncentral_t import t_test_power

__all__ = ["ClusterProportions", "CLUSTER_REFERENCE"]

#: The cluster-level analysis of a clustered binary outcome.
CLUSTER_REFERENCE = (
    "Hayes, R. J., & Moulton, L. H. (2017). Cluster Randomised Trials (2nd ed.), chapter 9 (analysis based on "
    "cluster-level summaries). Boca Raton: CRC Press; Donner, A., & Klar, N. (2000). Design and Analysis of "
    "Cluster Randomization Trials in Health Research. London: Arnold"
)


class ClusterProportions:
    """Mixin for a two-group binary family (before ``Family`` in its bases): with ``design.cluster``
    the analysis is the pooled two-sample t-test on the cluster proportions, whatever individual-level
    test the family names (that test ignores the clusters). The family provides ``_p2`` and
    ``reference``; ``not_run_with_clusters`` says, for the note, what of its own test is set aside."""

    cluster_means = True  # clustered: the t-test on cluster proportions (cluster_power, simulate_clusters)
    #: What of the family's individual-level test a clustered design does not run, for the notes.
    not_run_with_clusters: ClassVar[str] = "the individual-level test is not run"

    def label(self, design: DesignBase) -> str:
        if design.cluster is not None:
            return "approximation: noncentral t on cluster proportions"
        return super().label(design)

    def references(self, design: DesignBase) -> str:
        if design.cluster is not None:
            return f"{CLUSTER_REFERENCE}; individual-level tests: {self.reference}"
        return self.reference

    def cluster_exact(self, design: DesignBase) -> bool:
        return False  # cluster proportions are not normal and their variance differs between the groups

    def cluster_analysis(self, design: DesignBase) -> str:
        return "pooled two-sample t-test on the cluster proportions (unweighted)"

    def cluster_method(self, design: DesignBase) -> str:
        return ("approximation: the noncentral t on cluster proportions for the pooled two-sample t-test on the "
                "cluster proportions, df = k1 + k2 - 2, ncp = (p2 - p1) / sqrt(s^2 (1/k1 + 1/k2)), s^2 the two "
                "groups' pooled variance of a cluster proportion p (1 - p)(icc + (1 - icc)(1 + cv^2) / m) "
                "(Hayes & Moulton 2017, ch. 9; Donner & Klar 2000)")

    def cluster_formula(self, design: DesignBase) -> str:
        return ("approximation: noncentral t on cluster proportions, df = k1 + k2 - 2, each cluster proportion "
                "with variance p (1 - p)(icc + (1 - icc)(1 + cv^2) / m), pooled over the two groups")

    def cluster_model(self, design: DesignBase) -> str:
        assert design.cluster is not None
        sizes = (", cluster sizes drawn with the stated coefficient of variation"
                 if design.cluster.size_cv > 0 else "")
        return f"each cluster's probability beta-distributed with the stated icc, its count binomial{sizes}"

    def cluster_note(self, design: DesignBase) -> str:
        c = design.cluster
        assert c is not None
        return (
            f"{c.described}: the analysis is "
            f"the {self.cluster_analysis(design)}, one proportion per cluster (its count over its units), on "
            f"k1 + k2 - 2 degrees of freedom for k1 and k2 clusters; {self.not_run_with_clusters}. Each cluster "
            f"proportion has variance p (1 - p) x "
            f"{c.mean_variance:.4g} (design effect {c.design_effect:.4g} / cluster size); enrolment is then "
            "allowed for attrition and rounded up to whole clusters"
        )

    def doubts(self, design: DesignBase) -> tuple[str, ...]:
        if design.cluster is None:
            return ()
        return (f"the clustered size is the noncentral-t approximation to the {self.cluster_analysis(design)}, "
                "which with few clusters or outcomes near 0 or 1 can promise more power than the test has; it is "
                "verified by simulating the test where the simulation fits prespec's budget, and was not here "
                "(see the method notes; docs/methods.md, Clustered designs)",)

    def cluster_groups(self, design: DesignBase, clusters: int) -> tuple[int, int]:
        """Clusters in each group when group 1 has ``clusters``."""
        return clusters, math.ceil(design.allocation_ratio * clusters - 1e-9)

    def cluster_power(self, design: DesignBase, clusters: np.ndarray, effect_size: float) -> np.ndarray:
        """Approximate power of the pooled two-sample t-test on the cluster proportions.

        ``k1`` and ``k2 = ceil(r k1)`` clusters of ``m`` units; a cluster proportion of group ``g`` has
        variance ``v_g = p_g (1 - p_g)(icc + (1 - icc)(1 + cv^2) / m)`` (``Cluster.mean_variance``; the
        beta-binomial variance of a proportion, with the first-order ``1 + cv^2`` for unequal sizes).
        The pooled test estimates ``s^2 = ((k1 - 1) v_1 + (k2 - 1) v_2) / (k1 + k2 - 2)``, so the
        statistic is taken as noncentral t with ``df = k1 + k2 - 2`` and
        ``ncp = (p2 - p1) / sqrt(s^2 (1/k1 + 1/k2))`` (Hayes & Moulton 2017, ch. 9; Donner & Klar 2000).
        An approximation (the proportions are discrete and not normal): sizes are verified by
        :meth:`simulate_clusters`.

        Worked example (checked with scipy.stats.nct): ``p1 = 0.3``, ``p2 = 0.5``, ``m = 8``,
        ``icc = 0.1``, 20 clusters per group: the share ``icc + (1 - icc) / m = 0.2125``,
        ``s^2 = (0.21 + 0.25) / 2 x 0.2125 = 0.048875``, ``ncp = 0.2 / sqrt(0.048875 x 2 / 20) = 2.861``
        on 38 df, two-sided power 0.7961 (21 clusters: 0.8161).

        >>> from registry.power import design_from_params
        >>> from registry.power.two_proportions import cohens_h
        >>> design = design_from_params("two-proportions", p1=0.3, p2=0.5, cluster={"size": 8, "icc": 0.1})
        >>> [round(float(p), 4) for p in design.family.cluster_power(design, np.array([20, 21]), cohens_h(0.3, 0.5))]
        [0.7961, 0.8161]
        """
        assert design.cluster is not None
        p1, p2 = design.effect.p1, self._p2(design, effect_size)
        k1 = np.asarray(clusters, dtype=float)
        k2 = np.ceil(design.allocation_ratio * k1 - 1e-9)
        share = design.cluster.mean_variance
        pooled = ((k1 - 1) * p1 * (1 - p1) + (k2 - 1) * p2 * (1 - p2)) / (k1 + k2 - 2) * share
        ncp = (p2 - p1) / np.sqrt(pooled * (1 / k1 + 1 / k2))
        return t_test_power(ncp, k1 + k2 - 2, design.alpha, design.alternative)

    def simulate_clusters(self, design: DesignBase, clusters: int, reps: int, rng) -> np.ndarray:
        """The pooled two-sample t-test on the cluster proportions, ``k1 = clusters`` and ``k2 = ceil(r k1)``.

        Cluster ``j`` of group ``g`` has its own probability ``P_j``, beta-distributed with mean ``p_g``
        and ``a + b = (1 - icc) / icc`` (so the intracluster correlation of the 0/1 outcomes is ``icc``;
        with ``icc = 0`` every ``P_j = p_g``, plain binomial counts), and ``X_j ~ Binomial(m_j, P_j)``
        units with the outcome: the beta-binomial model of clustered binary data (Donner & Klar 2000;
        Hayes & Moulton 2017). ``m_j = m``, or with ``size_cv > 0`` a gamma variable with mean ``m`` and
        that coefficient of variation, rounded to a whole number of at least 1, as for the cluster means
        of the two-sample t-test. Each replicate is analysed with scipy's pooled t-test
        (``scipy.stats.ttest_ind``, group 2 minus group 1, the design's alternative) on the unweighted
        proportions ``X_j / m_j``. A replicate whose cluster proportions are all equal (all 0, say) has
        no variance and no p-value: it counts as not rejected. (A replicate whose groups are each
        constant but differ has an infinite t and counts as rejected.)

        Each group and each random component is drawn in a call of its own, so the first clusters of
        every replicate are the same at every number of clusters (common random numbers)."""
        cluster = design.cluster
        assert cluster is not None
        k2 = self.cluster_groups(design, clusters)[1]
        spread = (1 - cluster.icc) / cluster.icc if cluster.icc > 0 else math.inf
        proportions = []
        for count, p in ((clusters, design.effect.p1), (k2, design.effect.p2)):
            if cluster.size_cv > 0:
                shape = 1 / cluster.size_cv**2
                sizes = np.maximum(1, np.rint(rng.gamma(shape, cluster.size / shape, size=(reps, count))))
                sizes = sizes.astype(np.int64)
            else:
                sizes = np.full((reps, count), cluster.size, dtype=np.int64)
            chance = rng.beta(p * spread, (1 - p) * spread, size=(reps, count)) if math.isfinite(spread) else p
            proportions.append(rng.binomial(sizes, chance, size=(reps, count)) / sizes)
        control, treated = proportions
        with warnings.catch_warnings(), np.errstate(divide="ignore", invalid="ignore"):
            warnings.simplefilter("ignore", RuntimeWarning)  # the constant replicates: handled below
            p = stats.ttest_ind(treated, control, axis=1, equal_var=True, alternative=design.alternative).pvalue
        # equal rationals divide to the same double, so "all equal" is an exact comparison
        both = np.concatenate([control, treated], axis=1)
        constant = both.min(axis=1) == both.max(axis=1)
        return (p < design.alpha) & ~constant

