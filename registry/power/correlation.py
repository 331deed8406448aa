"""Pearson correlation against a null value, through Fisher's z transformation."""

from __future__ import annotations

import math

import numpy as np
from pydantic import field_validator, model_validator
from scipy import special
from .lazy import stats  # loaded on first use

from .base import DesignBase, EffectBase, Family, locked
from .restrictions import require_no_allocation_ratio

__all__ = ["Correlation", "CorrelationEffect"]


class CorrelationEffect(EffectBase):
    """The expected correlation ``r`` and the null value ``r0`` (default 0)."""

    r: float = locked(description="Expected Pearson correlation, in (-1, 1); signed for one-sided tests.")
    r0: float = locked(default=0.0, description="Correlation under the null hypothesis, in (-1, 1); default 0.")

    @field_validator("r", "r0")
    @classmethod
    def _open_interval(cls, value: float, info) -> float:
        if not -1 < value < 1:
            raise ValueError(f"{info.field_name} must be in (-1, 1); got {value!r}")
        return value

    @model_validator(mode="after")
    def _distinct(self) -> "CorrelationEffect":
        if self.r == self.r0:
            raise ValueError(f"r equals r0 ({self.r!r}): no sample size can detect a zero difference")
        return self


class Correlation(Family):
    """Power of the test of a Pearson correlation against ``r0``, by Fisher's z transformation.

    ``z(r) = atanh(r)`` is nearly normal with variance ``1/(n - 3)`` for ``n`` pairs of a
    bivariate normal, so the test statistic ``(z(r_hat) - z(r0)) sqrt(n - 3)`` is compared with
    the normal critical value and the power is
    ``Phi(q sqrt(n - 3) - z) + Phi(-q sqrt(n - 3) - z)`` (two-sided; one tail one-sided) with
    Cohen's ``q = atanh(r) - atanh(r0)``, the standardized effect reported. This is a
    normal approximation, not the exact distribution of ``r``.

    References: Fisher, R. A. (1921). On the "probable error" of a coefficient of correlation
    deduced from a small sample. *Metron*, 1, 3-32. Cohen, J. (1988). *Statistical Power
    Analysis for the Behavioral Sciences* (2nd ed.), chapters 3 and 4. Hillsdale, NJ: Lawrence
    Erlbaum.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("correlation", r=0.3)
    SampleSize(test='correlation', n_per_group=85, n_total=85, achieved_power=0.8003)
    """

    name = "correlation"
    exact = False
    title = "Pearson correlation (Fisher z test)"
    method = "normal approximation on Fisher's z = atanh(r) with standard error 1 / sqrt(n - 3)"
    reference = (
        "Fisher, R. A. (1921). On the \"probable error\" of a coefficient of correlation deduced from a small "
        "sample. Metron, 1, 3-32; Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences "
        "(2nd ed.), chapter 3. Hillsdale, NJ: Lawrence Erlbaum."
    )
    symbol = "q"
    unit = "pairs"
    groups = 1
    min_n = 4
    effect_model = CorrelationEffect
    example = {"r": 0.3}

    def effect_size(self, design: DesignBase) -> float:
        require_no_allocation_ratio(design, self)
        return math.atanh(design.effect.r) - math.atanh(design.effect.r0)

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        q = self.effect_size(design) if effect_size is None else effect_size
        n = np.atleast_1d(np.asarray(n, dtype=float))
        tails = 2 if design.alternative == "two-sided" else 1
        z = stats.norm.isf(design.alpha / tails)
        shift = q * np.sqrt(n - 3)
        up, down = special.ndtr(shift - z), special.ndtr(-shift - z)
        if design.alternative == "greater":
            return up
        if design.alternative == "less":
            return down
        return up + down

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        return super().approximate_n(design, effect_size) + 3

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        r = design.effect.r
        x = rng.normal(size=(reps, n))
        y = r * x + math.sqrt(1 - r * r) * rng.normal(size=(reps, n))
        xc = x - x.mean(axis=1, keepdims=True)
        yc = y - y.mean(axis=1, keepdims=True)
        r_hat = np.sum(xc * yc, axis=1) / np.sqrt(np.sum(xc * xc, axis=1) * np.sum(yc * yc, axis=1))
        r_hat = np.clip(r_hat, -1 + 1e-15, 1 - 1e-15)
        statistic = (np.arctanh(r_hat) - math.atanh(design.effect.r0)) * math.sqrt(n - 3)
        tails = 2 if design.alternative == "two-sided" else 1
        z = stats.norm.isf(design.alpha / tails)
        if design.alternative == "greater":
            return statistic > z
        if design.alternative == "less":
            return statistic < -z
        return np.abs(statistic) > z

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        return {"r": math.tanh(math.atanh(design.effect.r0) + effect_size), "q": effect_size}
