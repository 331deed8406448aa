"""Two groups compared by analysis of covariance on one baseline covariate."""

from __future__ import annotations

import math

import numpy as np
from pydantic import field_validator, model_validator
from .lazy import stats  # loaded on first use

from .base import DesignBase, EffectBase, Family, locked
from .mean_difference import _require_difference_or_d
from .noncentral_t import t_test_power

__all__ = ["Ancova", "AdjustedDifference"]


class AdjustedDifference(EffectBase):
    """The group ``difference`` with the outcome's ``sd`` (or a standardized ``d``) and the
    ``correlation`` between the baseline covariate and the outcome within groups."""

    difference: float | None = locked(
        default=None, description="Smallest difference in outcome means of interest, in outcome units (signed for "
        "one-sided tests)."
    )
    sd: float | None = locked(default=None, gt=0,
                              description="SD of the outcome within a group, before adjustment, in outcome units.")
    d: float | None = locked(default=None, description="Standardized effect: difference / unadjusted outcome SD.")
    correlation: float = locked(
        description="Correlation between the baseline covariate and the outcome within groups, in (-1, 1); "
        "the adjusted residual SD is sd x sqrt(1 - correlation^2)."
    )

    @field_validator("correlation")
    @classmethod
    def _open_interval(cls, value: float) -> float:
        if not -1 < value < 1:
            raise ValueError(f"correlation must lie strictly between -1 and 1; got {value!r}")
        return value

    @model_validator(mode="after")
    def _one_way_to_state_the_effect(self) -> "AdjustedDifference":
        _require_difference_or_d(self, self.sd is not None, "sd")
        return self

    def standardized(self) -> float:
        if self.d is not None:
            return self.d
        assert self.difference is not None and self.sd is not None
        return self.difference / self.sd

    def natural_scale(self) -> tuple[float, float]:
        if self.d is not None:
            return self.d, 1.0
        assert self.difference is not None and self.sd is not None
        return self.difference, self.sd


class Ancova(Family):
    """Power of the treatment t-test in the ANCOVA ``outcome ~ group + baseline`` (normal errors).

    The covariate removes the fraction ``rho^2`` of the outcome variance: the residual SD is
    ``sigma_e = sigma sqrt(1 - rho^2)`` (Borm, Fransen & Lemmens 2007), so the n is about
    ``1 - rho^2`` times the two-sample t's. One residual df is lost to the slope, ``df = N - 3``.
    Because the baseline is random, the adjusted difference has variance
    ``sigma_e^2 (1/n1 + 1/n2) (1 + 1/(N - 4))`` on average over covariate imbalance (the
    expectation of ``(x1bar - x2bar)^2 / S_xx``); power is taken from the noncentral t with
    ``df = N - 3`` and ``ncp = (delta / sigma_e) / sqrt((1/n1 + 1/n2)(N - 3)/(N - 4))``. This is an
    approximation (the exact power averages over the covariate); the tests check it against a
    simulation of the ANCOVA.

    References: Borm, G. F., Fransen, J., & Lemmens, W. A. J. G. (2007). A simple sample size formula
    for analysis of covariance in randomized clinical trials. *Journal of Clinical Epidemiology*,
    60(12), 1234-1238. Shieh, G. (2020). Power analysis and sample size planning in ANCOVA designs.
    *Psychometrika*, 85(1), 101-120.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("ancova", difference=4, sd=8, correlation=0.6)
    SampleSize(test='ancova', n_per_group=42, n_total=84, achieved_power=0.8030)
    """

    name = "ancova"
    title = "Two groups with a baseline covariate (ANCOVA)"
    method = ("approximation: noncentral t, df = N - 3, residual SD sigma sqrt(1 - rho^2), variance inflated "
              "by (N - 3)/(N - 4) for a random covariate")
    reference = (
        "Borm, G. F., Fransen, J., & Lemmens, W. A. J. G. (2007). A simple sample size formula for analysis of "
        "covariance in randomized clinical trials. Journal of Clinical Epidemiology, 60(12), 1234-1238; "
        "Shieh, G. (2020). Power analysis and sample size planning in ANCOVA designs. Psychometrika, 85(1), "
        "101-120."
    )
    symbol = "d"
    unit = "per group"
    groups = 2
    min_n = 3
    exact = False
    effect_model = AdjustedDifference
    example = {"difference": 4.0, "sd": 8.0, "correlation": 0.6}
    effect_words = {"correlation": "a correlation between the baseline covariate and the outcome of"}

    def effect_size(self, design: DesignBase) -> float:
        return design.effect.standardized()

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        es = self.effect_size(design) if effect_size is None else effect_size
        adjusted = es / math.sqrt(1 - design.effect.correlation ** 2)
        n1 = np.asarray(n, dtype=float)
        n2 = np.ceil(design.allocation_ratio * n1 - 1e-9)
        total = n1 + n2
        ncp = adjusted / np.sqrt((1 / n1 + 1 / n2) * (total - 3) / (total - 4))
        return t_test_power(ncp, total - 3, design.alpha, design.alternative)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        return super().approximate_n(design, effect_size) * (1 - design.effect.correlation ** 2)

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        """Baseline and outcome bivariate normal with the stated correlation; group 2 shifted by the
        difference. Each replicate is fitted by least squares, ``outcome ~ group + baseline``, and its
        group coefficient tested with the t distribution on N - 3 df."""
        difference, sd = design.effect.natural_scale()
        rho = design.effect.correlation
        n2 = self.group_sizes(design, n)[1]
        x = rng.normal(size=(reps, n + n2))
        y = sd * (rho * x + math.sqrt(1 - rho * rho) * rng.normal(size=(reps, n + n2)))
        y[:, n:] += difference
        t = ancova_t(x, y, n)
        df = n + n2 - 3
        if design.alternative == "greater":
            p = stats.t.sf(t, df)
        elif design.alternative == "less":
            p = stats.t.cdf(t, df)
        else:
            p = 2 * stats.t.sf(np.abs(t), df)
        return p < design.alpha

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        if design.effect.sd is not None:
            return {"difference": effect_size * design.effect.sd, "d": effect_size}
        return {"d": effect_size}

    def notes(self, design: DesignBase) -> tuple[str, ...]:
        rho = design.effect.correlation
        return (f"adjusting for the baseline (correlation {rho:g}) leaves a residual SD of sqrt(1 - {rho:g}^2) = "
                f"{math.sqrt(1 - rho * rho):.4g} times the outcome SD, about {1 - rho * rho:.3g} times the "
                "two-sample t-test's n; the slope costs one degree of freedom",)


def ancova_t(x: np.ndarray, y: np.ndarray, n1: int) -> np.ndarray:
    """The group-2-minus-group-1 t statistic of ``y ~ group + x`` for each row (rows: replicates,
    columns: the ``n1`` units of group 1, then group 2), from the within-group sums of squares."""
    groups = (slice(0, n1), slice(n1, None))
    means_x = [x[:, g].mean(axis=1) for g in groups]
    means_y = [y[:, g].mean(axis=1) for g in groups]
    dx = np.concatenate([x[:, g] - m[:, None] for g, m in zip(groups, means_x)], axis=1)
    dy = np.concatenate([y[:, g] - m[:, None] for g, m in zip(groups, means_y)], axis=1)
    sxx, sxy, syy = (dx * dx).sum(axis=1), (dx * dy).sum(axis=1), (dy * dy).sum(axis=1)
    slope = sxy / sxx
    gap_x = means_x[1] - means_x[0]
    estimate = (means_y[1] - means_y[0]) - slope * gap_x
    n2 = x.shape[1] - n1
    residual = (syy - sxy * slope) / (n1 + n2 - 3)
    return estimate / np.sqrt(residual * (1 / n1 + 1 / n2 + gap_x ** 2 / sxx))
