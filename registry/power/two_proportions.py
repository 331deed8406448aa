"""Two independent proportions: the z test (pooled, continuity-corrected or arcsine), with exact power;
randomised in clusters, the pooled t-test on the cluster proportions."""

from __future__ import annotations

import math
from typing import Literal

import numpy as np
from pydantic import field_validator, model_validator
from scipy import special

from .base import DesignBase, EffectBase, Family, InfeasibleDesign, fraction_validator, locked
from .binary_tables import EXACT_CELLS, enumeration_cells, exact_power
from .cluster_proportions import ClusterProportions

__all__ = ["TwoProportions", "ProportionPair", "cohens_h", "proportion_for_h"]



def cohens_h(p_from: float, p_to: float) -> float:
    """Cohen's h = 2 asin sqrt(p_to) - 2 asin sqrt(p_from).

    >>> round(cohens_h(0.3, 0.5), 4)
    0.4115
    """
    return 2 * math.asin(math.sqrt(p_to)) - 2 * math.asin(math.sqrt(p_from))


def z_test_tails(p1: float, p2: float, n1: np.ndarray, n2: np.ndarray, z: float,
                 corrected: bool) -> tuple[np.ndarray, np.ndarray]:
    """Normal approximation to the probability that the pooled z test (continuity-corrected when
    ``corrected``) exceeds ``z`` upwards and downwards (Fleiss 1981, section 3.2; Fleiss, Tytun & Ury 1980)."""
    delta = p2 - p1
    pbar = (n1 * p1 + n2 * p2) / (n1 + n2)
    sigma0 = np.sqrt(pbar * (1 - pbar) * (1 / n1 + 1 / n2))
    sigma1 = np.sqrt(p1 * (1 - p1) / n1 + p2 * (1 - p2) / n2)
    correction = (1 / n1 + 1 / n2) / 2 if corrected else 0.0
    return (special.ndtr((delta - correction - z * sigma0) / sigma1),
            special.ndtr((-delta - correction - z * sigma0) / sigma1))


def tails_for(up: np.ndarray, down: np.ndarray, alternative: str) -> np.ndarray:
    """The rejection probability of the test's sides from its upward and downward tails."""
    if alternative == "greater":
        return up
    if alternative == "less":
        return down
    return up + down


def proportion_for_h(p_from: float, h: float) -> float:
    """The proportion at Cohen's ``h`` from ``p_from`` (clipped to [0, 1] beyond the possible range).

    >>> round(proportion_for_h(0.3, cohens_h(0.3, 0.5)), 12)
    0.5
    """
    angle = min(max(math.asin(math.sqrt(p_from)) + h / 2, 0.0), math.pi / 2)
    return math.sin(angle) ** 2


class ProportionPair(EffectBase):
    """Expected proportions in the control (``p1``) and treatment (``p2``) groups, and the test used."""

    p1: float = locked(description="Expected proportion with the outcome in group 1 (control), in (0, 1).")
    p2: float = locked(description="Expected proportion in group 2 (treatment), in (0, 1); differs from p1.")
    method: Literal["pooled", "arcsine"] = locked(
        default="pooled",
        description="pooled: z test with the pooled proportion under H0 (Fleiss); arcsine: z test on "
        "2 asin sqrt(p), Cohen's h.",
    )
    continuity_correction: bool = locked(
        default=False, description="pooled method only: Yates-type continuity correction (Fleiss, Tytun & Ury 1980)."
    )

    @field_validator("p1", "p2")
    @classmethod
    def _fraction(cls, value: float, info) -> float:
        return fraction_validator(info.field_name)(value)

    @model_validator(mode="after")
    def _distinct(self) -> "ProportionPair":
        if self.p1 == self.p2:
            raise ValueError(f"p1 and p2 are both {self.p1!r}: no sample size can detect a zero difference")
        if self.continuity_correction and self.method == "arcsine":
            raise ValueError("continuity_correction applies to method 'pooled' only; remove it or use method: pooled")
        return self


class TwoProportions(ClusterProportions, Family):
    """Exact power of the z test comparing two independent proportions.

    Group 1 (control, ``p1``) has ``n1`` units, group 2 (treatment, ``p2``) has
    ``n2 = ceil(r n1)``; ``delta = p2 - p1``.

    Power is the probability that the test the lab runs rejects H0, summed over every possible
    pair of counts (:mod:`registry.power.binary_tables`): it is exact, and the reported n is the
    smallest from which every larger n (checked up to well past it) reaches the target. The
    tests: *pooled* (default), the z statistic with the pooled proportion under H0 (two-sided:
    Pearson's chi-square without correction); with ``continuity_correction`` the difference is
    reduced by ``(1/n1 + 1/n2)/2`` (two-sided: Yates' corrected chi-square); *arcsine*, the z test
    on ``2 asin sqrt(p)``.

    The search starts from the usual normal-approximation formula, reported as the starting point:
    Fleiss (1981, eq. 3.14) ``n1 = [z sqrt((1 + 1/r) pbar qbar) + z_beta sqrt(p1 q1 + p2 q2 / r)]^2 / delta^2``,
    with the Fleiss, Tytun & Ury (1980) correction ``n' = n/4 (1 + sqrt(1 + 2 (r + 1) / (r n |delta|)))^2``,
    or ``(z + z_beta)^2 (1 + 1/r) / h^2`` for the arcsine test (Cohen 1988, ch. 6). Those formulas can fall
    a unit or more short of the target for the discrete test; :meth:`formula_power` is their power.

    The standardized effect reported for both methods is Cohen's ``h = 2 asin sqrt(p2) - 2 asin sqrt(p1)``;
    a minimum detectable h is turned back into p2 with p1 held fixed.

    References: Fleiss, J. L. (1981). *Statistical Methods for Rates and Proportions* (2nd ed.),
    chapter 3. New York: Wiley. Fleiss, J. L., Tytun, A., & Ury, H. K. (1980). A simple
    approximation for calculating sample sizes for comparing independent proportions.
    *Biometrics*, 36(2), 343-346. Cohen, J. (1988). *Statistical Power Analysis for the
    Behavioral Sciences* (2nd ed.), chapter 6. Hillsdale, NJ: Lawrence Erlbaum.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> result = sample_size("two-proportions", p1=0.3, p2=0.5)
    >>> result.n_per_group, result.start_n, round(result.achieved_power, 4)
    (94, 93, 0.8002)
    >>> sample_size("two-proportions", p1=0.3, p2=0.5, continuity_correction=True).n_per_group
    102

    **Randomised in clusters** (``design.cluster``: litters, cages, plates), the analysis is the
    standard cluster-level one whatever ``method`` says: each cluster's proportion (its count over
    its units, unweighted) is one observation, and the groups' ``k1`` and ``k2 = ceil(r k1)``
    cluster proportions are compared with the pooled two-sample t-test on ``k1 + k2 - 2`` df
    (Hayes & Moulton 2017, ch. 9; Donner & Klar 2000). ``method: arcsine`` and
    ``continuity_correction`` choose individual-level z tests and are refused with a cluster block.
    :meth:`cluster_power` is the noncentral-t approximation to that test's power and is the starting
    point only: the size is verified by simulating the test (:meth:`simulate_clusters`), since
    cluster proportions are neither normal nor of equal variance in the two groups. With ``m = 8``
    and ``icc = 0.1`` the formula asks for 21 clusters per group for ``p1 = 0.3``, ``p2 = 0.5``:

    >>> clustered = sample_size("two-proportions", p1=0.3, p2=0.5, cluster={"size": 8, "icc": 0.1})
    >>> clustered.clusters_per_group, clustered.label
    ((21, 21), 'approximation: noncentral t on cluster proportions')
    """

    name = "two-proportions"
    monotone = False
    scan_floor = 0.5
    title = "Two independent proportions (z test)"
    method = ("exact: every possible pair of counts enumerated for the z test with pooled variance under H0 "
              "(chi-square), optionally continuity-corrected (Yates), or on the arcsine scale")
    reference = (
        "Fleiss, J. L. (1981). Statistical Methods for Rates and Proportions (2nd ed.), chapter 3. New York: "
        "Wiley; Fleiss, J. L., Tytun, A., & Ury, H. K. (1980). A simple approximation for calculating sample "
        "sizes for comparing independent proportions. Biometrics, 36(2), 343-346; Cohen, J. (1988). "
        "Statistical Power Analysis for the Behavioral Sciences (2nd ed.), chapter 6. Hillsdale, NJ: Erlbaum."
    )
    symbol = "h"
    unit = "per group"
    groups = 2
    effect_model = ProportionPair
    example = {"p1": 0.3, "p2": 0.5}
    distributions = ("binary",)
    not_run_with_clusters = "the z-test settings (method, continuity_correction) do not apply"

    def effect_size(self, design: DesignBase) -> float:
        return cohens_h(design.effect.p1, design.effect.p2)

    def _p2(self, design: DesignBase, effect_size: float | None) -> float:
        if effect_size is None:
            return design.effect.p2
        return proportion_for_h(design.effect.p1, effect_size)

    def formula(self, design: DesignBase) -> str | None:
        if design.cluster is not None:  # the cluster-level power is its own formula, started from directly
            return None
        if design.effect.method == "arcsine":
            return "normal approximation on the arcsine scale (Cohen 1988)"
        if design.effect.continuity_correction:
            return "normal approximation with continuity correction (Fleiss, Tytun & Ury 1980)"
        return "normal approximation with pooled variance under H0 (Fleiss 1981, eq. 3.14)"

    def _test(self, design: DesignBase) -> str:
        effect = design.effect
        if effect.method == "arcsine":
            return "arcsine"
        return "corrected" if effect.continuity_correction else "pooled"

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        """Exact power by enumeration; beyond :data:`EXACT_CELLS` tables, the normal approximation."""
        p1, p2 = design.effect.p1, self._p2(design, effect_size)
        test = self._test(design)
        n1 = np.atleast_1d(np.asarray(n, dtype=float))
        out = np.empty(n1.shape)
        for i, size in enumerate(n1.ravel()):
            m1 = int(size)
            m2 = math.ceil(design.allocation_ratio * m1 - 1e-9)
            if enumeration_cells(test, m1, m2, p1, p2) > EXACT_CELLS:
                out.flat[i] = self.formula_power(design, np.array([m1]), effect_size)[0]
            else:
                out.flat[i] = exact_power(test, m1, m2, p1, p2, design.alpha, design.alternative)  # type: ignore
        return out

    def enumeration_cost(self, design: DesignBase, n: float) -> float:
        if design.cluster is not None:  # the cluster-level power enumerates nothing
            return 0.0
        m1 = int(n)
        m2 = math.ceil(design.allocation_ratio * m1 - 1e-9)
        return enumeration_cells(self._test(design), m1, m2, design.effect.p1, design.effect.p2)

    def formula_power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        """The normal approximation to the power (Fleiss 1981; Fleiss, Tytun & Ury 1980; Cohen 1988)."""
        effect = design.effect
        p1 = effect.p1
        p2 = self._p2(design, effect_size)
        n1 = np.atleast_1d(np.asarray(n, dtype=float))
        n2 = np.ceil(design.allocation_ratio * n1 - 1e-9)
        tails = 2 if design.alternative == "two-sided" else 1
        z = -special.ndtri(design.alpha / tails)
        if effect.method == "arcsine":
            h = cohens_h(p1, p2)
            shift = h * np.sqrt(n1 * n2 / (n1 + n2))
            up, down = special.ndtr(shift - z), special.ndtr(-shift - z)
        else:
            up, down = z_test_tails(p1, p2, n1, n2, z, effect.continuity_correction)
        return tails_for(up, down, design.alternative)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        effect = design.effect
        r = design.allocation_ratio
        tails = 2 if design.alternative == "two-sided" else 1
        z_alpha, z_beta = -special.ndtri(design.alpha / tails), special.ndtri(design.power)
        p1, p2 = effect.p1, self._p2(design, effect_size)
        if effect.method == "arcsine":
            return (z_alpha + z_beta) ** 2 * (1 + 1 / r) / cohens_h(p1, p2) ** 2
        delta = abs(p2 - p1)
        pbar = (p1 + r * p2) / (1 + r)
        n = (z_alpha * math.sqrt((1 + 1 / r) * pbar * (1 - pbar))
             + z_beta * math.sqrt(p1 * (1 - p1) + p2 * (1 - p2) / r)) ** 2 / delta**2  # Fleiss (1981) eq. 3.14
        if effect.continuity_correction:  # Fleiss, Tytun & Ury (1980)
            n = n / 4 * (1 + math.sqrt(1 + 2 * (r + 1) / (r * n * delta))) ** 2
        return n

    def simulate(self, design, n, reps, rng, distribution="binary"):  # type: ignore[override]
        effect = design.effect
        n1, n2 = self.group_sizes(design, n)
        x1 = rng.binomial(n1, effect.p1, size=reps)
        x2 = rng.binomial(n2, effect.p2, size=reps)
        q1, q2 = x1 / n1, x2 / n2
        tails = 2 if design.alternative == "two-sided" else 1
        z_crit = -special.ndtri(design.alpha / tails)
        if effect.method == "arcsine":
            z = (2 * np.arcsin(np.sqrt(q2)) - 2 * np.arcsin(np.sqrt(q1))) / math.sqrt(1 / n1 + 1 / n2)
        else:
            pooled = (x1 + x2) / (n1 + n2)
            se = np.sqrt(pooled * (1 - pooled) * (1 / n1 + 1 / n2))
            diff = q2 - q1
            if effect.continuity_correction:  # shrink |difference| by the correction, never past 0
                diff = np.sign(diff) * np.maximum(np.abs(diff) - (1 / n1 + 1 / n2) / 2, 0.0)
            z = np.divide(diff, se, out=np.zeros_like(diff), where=se > 0)
        if design.alternative == "greater":
            return z > z_crit
        if design.alternative == "less":
            return z < -z_crit
        return np.abs(z) > z_crit

    # ---------------------------------------------------------------- randomised in clusters

    def unused_effect_fields(self, design: DesignBase) -> frozenset[str]:
        """The z test's settings, with a cluster block (the analysis is the t-test on cluster proportions)."""
        return frozenset({"method", "continuity_correction"}) if design.cluster is not None else frozenset()

    def check_direction(self, design: DesignBase, effect_size: float) -> None:
        """Also refuse the individual-level z-test settings with a cluster block: the analysis of a
        clustered design is the t-test on the cluster proportions, which has neither."""
        super().check_direction(design, effect_size)
        if design.cluster is None:
            return
        effect = design.effect
        chosen = ("method", f"method {effect.method!r}") if effect.method == "arcsine" else (
            ("continuity_correction", "continuity_correction") if effect.continuity_correction else None)
        if chosen is not None:
            raise InfeasibleDesign(
                f"with design.cluster the analysis is the {self.cluster_analysis(design)}, so {chosen[1]} (a "
                "setting of the individual-level z test, which ignores the clusters) does not apply; remove "
                f"design.effect.{chosen[0]}, or remove the cluster block if the units are independent",
                f"design.effect.{chosen[0]}")

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        p2 = proportion_for_h(design.effect.p1, effect_size)
        return {"p2": p2, "difference": p2 - design.effect.p1, "h": effect_size}
