"""Welch's two-sample t-test (unequal variances) with an allocation ratio."""

from __future__ import annotations

import math

import numpy as np
from pydantic import model_validator
from scipy import special
from .lazy import stats  # loaded on first use

from .base import DesignBase, EffectBase, Family, locked

__all__ = ["WelchT", "UnequalSpread", "welch_power"]

# Quadrature over each sample variance on the probability scale u in (0, 1): Gauss-Legendre in t with
# u = (1 - cos(pi t)) / 2, which crowds nodes into both tails where the chi-square quantile moves fast
# (absolute error about 1e-8 against 3000 nodes).
_NODES, _WEIGHTS = np.polynomial.legendre.leggauss(48)
_T = (_NODES + 1) / 2
_U = (1 - np.cos(np.pi * _T)) / 2
_W = _WEIGHTS / 2 * np.pi / 2 * np.sin(np.pi * _T)


class UnequalSpread(EffectBase):
    """The smallest ``difference`` of interest (treatment minus control) and each group's SD."""

    difference: float = locked(description="Smallest difference of interest (group 2 minus group 1), in outcome units.")
    sd1: float = locked(gt=0, description="SD of the outcome in group 1 (control), in outcome units.")
    sd2: float = locked(gt=0, description="SD of the outcome in group 2 (treatment), in outcome units.")

    @model_validator(mode="after")
    def _nonzero(self) -> "UnequalSpread":
        if self.difference == 0:
            raise ValueError("difference must not be 0: no sample size can detect a zero difference")
        return self

    def root_mean_square_sd(self) -> float:
        return math.sqrt((self.sd1**2 + self.sd2**2) / 2)


def welch_power(difference: float, sd1: float, sd2: float, n1: np.ndarray, n2: np.ndarray, alpha: float,
                alternative: str) -> np.ndarray:
    """Exact power of Welch's t-test for normal data, by integrating over both sample variances.

    The mean difference is normal and independent of the sample variances
    ``s_i^2 = sd_i^2 X_i / (n_i - 1)`` with ``X_i ~ chi-square(n_i - 1)``. Given them, the test
    rejects when ``|mean difference| > t_{1-alpha/2, df} * se`` with the Satterthwaite ``df`` and
    ``se`` computed from the sample variances, a normal probability; the power is its expectation,
    a two-dimensional integral done by 48 x 48 Gauss-Legendre quadrature on the probability scale.
    Group sizes below 2 leave a variance undefined; their power is reported as 0.

    Reference: Welch, B. L. (1947). The generalization of "Student's" problem when several
    different population variances are involved. *Biometrika*, 34(1-2), 28-35.

    Examples
    --------
    >>> round(float(welch_power(1.0, 1.0, 1.0, np.array([17]), np.array([17]), 0.05, "two-sided")[0]), 4)
    0.8058
    """
    n1 = np.atleast_1d(np.asarray(n1, dtype=float))
    n2 = np.atleast_1d(np.asarray(n2, dtype=float))
    defined = (n1 >= 2) & (n2 >= 2)
    n1 = np.where(defined, n1, 2.0)[:, None, None]
    n2 = np.where(defined, n2, 2.0)[:, None, None]
    nu1, nu2 = n1 - 1, n2 - 1
    a = sd1**2 * 2 * special.gammaincinv(nu1 / 2, _U[None, :, None]) / nu1 / n1  # s1^2 / n1
    b = sd2**2 * 2 * special.gammaincinv(nu2 / 2, _U[None, None, :]) / nu2 / n2  # s2^2 / n2
    se = np.sqrt(a + b)
    df = (a + b) ** 2 / (a**2 / nu1 + b**2 / nu2)
    sd_of_mean_difference = np.sqrt(sd1**2 / n1 + sd2**2 / n2)
    tails = 2 if alternative == "two-sided" else 1
    bound = -special.stdtrit(df, alpha / tails) * se
    upper = special.ndtr((difference - bound) / sd_of_mean_difference)
    lower = special.ndtr((-difference - bound) / sd_of_mean_difference)
    if alternative == "two-sided":
        conditional = upper + lower
    elif alternative == "greater":
        conditional = upper
    elif alternative == "less":
        conditional = lower
    else:
        raise ValueError(f"alternative must be 'two-sided', 'greater' or 'less'; got {alternative!r}")
    return np.where(defined, np.einsum("nij,i,j->n", conditional, _W, _W), 0.0)


class WelchT(Family):
    """Power of Welch's t-test, for two groups with unequal SDs.

    Group 1 (control) has ``n1`` analysable units and SD ``sd1``, group 2 has
    ``n2 = ceil(r * n1)`` and ``sd2``. The test statistic is
    ``(mean2 - mean1) / sqrt(s1^2/n1 + s2^2/n2)`` referred to a t distribution with the
    Welch-Satterthwaite df computed from the sample variances. Power is computed exactly for
    normal outcomes by integrating over the joint distribution of the two sample variances
    (see :func:`welch_power`); the common shortcut, a noncentral t with the df evaluated at the
    population SDs, is an approximation and serves only as a check. The standardized effect is
    ``d = difference / sqrt((sd1^2 + sd2^2) / 2)``.

    References: Welch, B. L. (1947). The generalization of "Student's" problem when several
    different population variances are involved. *Biometrika*, 34(1-2), 28-35.
    Satterthwaite, F. E. (1946). An approximate distribution of estimates of variance
    components. *Biometrics Bulletin*, 2(6), 110-114.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("welch-t", difference=4.0, sd1=4.0, sd2=6.0)
    SampleSize(test='welch-t', n_per_group=27, n_total=54, achieved_power=0.8049)
    """

    name = "welch-t"
    title = "Welch two-sample t-test (unequal SDs)"
    method = ("exact power of Welch's t-test for normal outcomes, integrating over both sample variances "
              "(Satterthwaite df from the sample SDs)")
    reference = (
        "Welch, B. L. (1947). The generalization of \"Student's\" problem when several different population "
        "variances are involved. Biometrika, 34(1-2), 28-35; Satterthwaite, F. E. (1946). An approximate "
        "distribution of estimates of variance components. Biometrics Bulletin, 2(6), 110-114."
    )
    symbol = "d"
    unit = "per group"
    groups = 2
    effect_model = UnequalSpread
    example = {"difference": 4.0, "sd1": 4.0, "sd2": 6.0}

    def effect_size(self, design: DesignBase) -> float:
        effect = design.effect
        return effect.difference / effect.root_mean_square_sd()

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        effect = design.effect
        es = self.effect_size(design) if effect_size is None else effect_size
        n1 = np.atleast_1d(np.asarray(n, dtype=float))
        n2 = np.ceil(design.allocation_ratio * n1 - 1e-9)
        return welch_power(es * effect.root_mean_square_sd(), effect.sd1, effect.sd2, n1, n2, design.alpha,
                           design.alternative)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        effect = design.effect
        tails = 2 if design.alternative == "two-sided" else 1
        z = -special.ndtri(design.alpha / tails) + special.ndtri(design.power)
        difference = effect_size * effect.root_mean_square_sd()
        return z**2 * (effect.sd1**2 + effect.sd2**2 / design.allocation_ratio) / difference**2

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        effect = design.effect
        n2 = self.group_sizes(design, n)[1]
        control = rng.normal(0.0, effect.sd1, size=(reps, n))
        treated = rng.normal(effect.difference, effect.sd2, size=(reps, n2))
        p = stats.ttest_ind(treated, control, axis=1, equal_var=False, alternative=design.alternative).pvalue
        return p < design.alpha

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        return {"difference": effect_size * design.effect.root_mean_square_sd(), "d": effect_size}
