"""Multiple linear regression: the F test of R-squared or of its increase over covariates."""

from __future__ import annotations

import math
from typing import Literal

import numpy as np
from pydantic import field_validator, model_validator
from scipy import special

from .lazy import stats  # loaded on first use

from .base import DesignBase, EffectBase, Family, locked
from .noncentral_f import f_test_power, required_noncentrality
from .restrictions import require_no_allocation_ratio, require_two_sided

__all__ = ["LinearRegression", "RegressionEffect"]


class RegressionEffect(EffectBase):
    """Cohen's ``f2``, or the full model's ``r2``, or ``r2_change`` with ``r2_full``; and the predictors."""

    f2: float | None = locked(default=None, gt=0, description="Cohen's f^2 = R^2 change / (1 - R^2 of the full model).")
    r2: float | None = locked(default=None, description="R^2 of the model when all its predictors are tested, in (0, 1).")
    r2_change: float | None = locked(default=None, description="Increase in R^2 the tested predictors bring, "
                                                                "with r2_full, in (0, r2_full].")
    r2_full: float | None = locked(default=None, description="R^2 of the full model (tested predictors and covariates), "
                                                              "in (0, 1), with r2_change.")
    predictors: int = locked(ge=1, le=10000, description="Number of predictors tested (numerator df, u).")
    total_predictors: int | None = locked(default=None, ge=1, le=10000,
                                          description="All predictors in the full model, tested and covariates; "
                                                      "default: predictors.")
    predictor_values: Literal["random", "fixed"] = locked(
        default="random",
        description="random (default): measured predictors that vary from sample to sample (multivariate "
        "normal); fixed: values set by the design (doses, factor levels), the noncentral F of Cohen (1988).")

    @field_validator("r2", "r2_change", "r2_full")
    @classmethod
    def _fraction(cls, value: float | None, info) -> float | None:
        if value is not None and not 0 < value < 1:
            raise ValueError(f"{info.field_name} must be in (0, 1); got {value!r}")
        return value

    @model_validator(mode="after")
    def _one_way_to_state_the_effect(self) -> "RegressionEffect":
        given = [name for name in ("f2", "r2", "r2_change") if getattr(self, name) is not None]
        if len(given) != 1:
            raise ValueError("give exactly one of f2, r2 (all predictors tested) or r2_change with r2_full; "
                             f"got {', '.join(given) or 'none'}")
        if (self.r2_change is None) != (self.r2_full is None):
            raise ValueError("r2_change and r2_full go together: give both, or f2, or r2")
        if self.r2_change is not None and self.r2_change > self.r2_full:  # type: ignore[operator]
            raise ValueError(f"r2_change ({self.r2_change!r}) cannot exceed r2_full ({self.r2_full!r})")
        if self.total_predictors is not None and self.total_predictors < self.predictors:
            raise ValueError(f"total_predictors ({self.total_predictors}) cannot be fewer than the "
                             f"{self.predictors} tested predictors")
        if self.r2 is not None and self.total_predictors not in (None, self.predictors):
            raise ValueError("r2 tests the whole model, so total_predictors must equal predictors; "
                             "for predictors added to covariates give r2_change with r2_full")
        return self

    @property
    def all_predictors(self) -> int:
        return self.total_predictors if self.total_predictors is not None else self.predictors

    def cohens_f2(self) -> float:
        if self.f2 is not None:
            return self.f2
        if self.r2 is not None:
            return self.r2 / (1 - self.r2)
        return self.r2_change / (1 - self.r2_full)  # type: ignore[operator]


class LinearRegression(Family):
    """Power of the F test that ``u`` predictors add nothing to a linear regression on ``N`` units.

    With ``p`` predictors in the full model (the ``u`` tested plus ``p - u`` covariates), the F
    statistic follows a noncentral F with ``df1 = u``, ``df2 = N - p - 1`` and
    ``lambda = f^2 N``, where ``f^2 = R^2 change / (1 - R^2 full)`` (``R^2 / (1 - R^2)`` when every
    predictor is tested). Cohen writes ``lambda = f^2 (u + v + 1)`` with ``v = df2``: the same
    when ``p = u``; with covariates his value is ``f^2 (N - p + u)``, slightly smaller, and the
    ``f^2 N`` used here is the noncentrality of fixed predictors whose population R^2 values are
    the stated ones. Power is exact for fixed predictors and normal errors; with random predictors
    (``predictor_values: random``, the default) it is averaged over their distribution (see
    :meth:`power`). Only two-sided.

    References: Cohen, J. (1988). *Statistical Power Analysis for the Behavioral Sciences*
    (2nd ed.), chapter 9 (F tests of variance proportions in multiple regression/correlation
    analysis). Hillsdale, NJ: Lawrence Erlbaum. Sampson, A. R. (1974). A tale of two regressions.
    *Journal of the American Statistical Association*, 69(347), 682-689. Gatsonis, C., & Sampson,
    A. R. (1989). Multiple correlation: exact power and sample size calculations. *Psychological
    Bulletin*, 106(3), 516-524.

    Examples
    --------
    >>> from registry.power import sample_size
    >>> sample_size("linear-regression", f2=0.15, predictors=5, predictor_values="fixed")
    SampleSize(test='linear-regression', n_per_group=92, n_total=92, achieved_power=0.8042)
    >>> sample_size("linear-regression", f2=0.15, predictors=5)  # measured predictors (the default)
    SampleSize(test='linear-regression', n_per_group=94, n_total=94, achieved_power=0.8008)
    """

    name = "linear-regression"
    title = "Multiple linear regression (F test of R-squared)"
    undirected = "F"
    method = ("power of the F test, df = (u, N - p - 1): noncentral F with lambda = f^2 N for fixed predictors, "
              "averaged over lambda = f^2 W, W chi-square with N - 1 - (p - u) df, for random predictors")
    reference = (
        "Cohen, J. (1988). Statistical Power Analysis for the Behavioral Sciences (2nd ed.), chapter 9. "
        "Hillsdale, NJ: Lawrence Erlbaum."
    )
    symbol = "f2"
    unit = "units"
    groups = 1
    min_n = 3
    effect_model = RegressionEffect
    example = {"f2": 0.15, "predictors": 5}

    def effect_size(self, design: DesignBase) -> float:
        require_two_sided(design, self)
        require_no_allocation_ratio(design, self)
        return design.effect.cohens_f2()

    def label(self, design: DesignBase) -> str:
        if design.effect.predictor_values == "fixed":
            return "exact for fixed predictors"
        return "exact (numerical integration over the predictors' distribution)"

    def power(self, design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
        """Power at ``n`` total units; 0 where ``N <= p + 1`` leaves no residual df.

        Fixed predictors: noncentral F with ``lambda = f^2 N``. Random (multivariate normal)
        predictors: given the sample's predictors the statistic is noncentral F with
        ``lambda = f^2 W``, where ``W`` (the tested predictors' sum of squares after the intercept and
        the covariates, in population-variance units) is chi-square with ``N - 1 - (p - u)`` df; the
        power is the average over W, by composite Gauss-Legendre quadrature on W's probability scale
        (208 points, accurate to about 1e-8)
        (Sampson 1974; Gatsonis & Sampson 1989)."""
        f2 = self.effect_size(design) if effect_size is None else effect_size
        n = np.atleast_1d(np.asarray(n, dtype=float))
        effect = design.effect
        df2 = n - effect.all_predictors - 1
        defined = df2 >= 1
        safe_df2 = np.where(defined, df2, 1.0)
        if effect.predictor_values == "fixed":
            power = f_test_power(f2 * n, effect.predictors, safe_df2, design.alpha)
        else:
            nodes, weights = _QUADRATURE
            dof = np.where(defined, n - 1 - (effect.all_predictors - effect.predictors), 1.0)
            w = special.chdtri(dof[..., None], 1 - nodes)  # chi-square quantiles at the nodes
            power = np.sum(weights * f_test_power(f2 * w, effect.predictors, safe_df2[..., None], design.alpha),
                           axis=-1)
        return np.where(defined, power, 0.0)

    def approximate_n(self, design: DesignBase, effect_size: float) -> float:
        needed = required_noncentrality(design.effect.predictors, design.alpha, design.power)
        return needed / effect_size + design.effect.all_predictors + 1

    def simulate(self, design, n, reps, rng, distribution="normal"):  # type: ignore[override]
        if design.effect.predictor_values == "random":
            return self._simulate_random(design, n, reps, rng)
        return self._simulate_fixed(design, n, reps, rng)

    def _simulate_random(self, design, n, reps, rng):
        """New standard-normal predictors in every experiment (independent, so the tested ones share
        f^2 equally with coefficients sqrt(f^2 / u)), covariates with coefficient 0.5, normal errors;
        each experiment fitted with and without the tested predictors and judged by the F test."""
        effect = design.effect
        u, p = effect.predictors, effect.all_predictors
        if n < p + 2:
            raise ValueError(f"n = {n} leaves no residual degrees of freedom for {p} predictors")
        beta = np.concatenate([np.full(u, math.sqrt(self.effect_size(design) / u)), np.full(p - u, 0.5)])
        df2 = n - p - 1
        crit = stats.f.isf(design.alpha, u, df2)
        out = np.empty(reps, dtype=bool)
        step = max(1, 2_000_000 // (n * (p + 1)))  # experiments per batch: bounds memory
        for first in range(0, reps, step):
            count = min(step, reps - first)
            x = rng.normal(size=(count, n, p))
            y = x @ beta + rng.normal(size=(count, n))
            ones = np.ones((count, n, 1))
            rss_full = _batched_rss(np.concatenate([ones, x], axis=2), y)
            rss_reduced = _batched_rss(np.concatenate([ones, x[:, :, u:]], axis=2), y)
            out[first:first + count] = (rss_reduced - rss_full) / u / (rss_full / df2) > crit
        return out

    def _simulate_fixed(self, design, n, reps, rng):
        """Fixed predictors, drawn once and made exactly uncorrelated with unit variance (so the
        stated f^2 holds exactly in the sample), covariates with coefficient 0.5, tested predictors
        sharing f^2 equally, normal errors; each experiment is fitted by least squares with and
        without the tested predictors and judged by the F test."""
        effect = design.effect
        u, p = effect.predictors, effect.all_predictors
        if n < p + 2:
            raise ValueError(f"n = {n} leaves no residual degrees of freedom for {p} predictors")
        raw = rng.normal(size=(n, p))
        q, _ = np.linalg.qr(raw - raw.mean(axis=0))
        x = q * math.sqrt(n)  # centred, orthogonal, each column with mean square 1
        beta = np.concatenate([np.full(u, math.sqrt(self.effect_size(design) / u)), np.full(p - u, 0.5)])
        y = (x @ beta)[None, :] + rng.normal(size=(reps, n))
        ones = np.ones((n, 1))
        full = np.hstack([ones, x])
        reduced = np.hstack([ones, x[:, u:]])
        rss_full = _residual_sum_of_squares(full, y)
        rss_reduced = _residual_sum_of_squares(reduced, y)
        df2 = n - p - 1
        f_stat = (rss_reduced - rss_full) / u / (rss_full / df2)
        return f_stat > stats.f.isf(design.alpha, u, df2)

    def natural_effect(self, design: DesignBase, effect_size: float) -> dict[str, float]:
        effect = design.effect
        if effect.r2_change is not None:
            base = effect.r2_full - effect.r2_change  # covariates' R^2 held fixed
            change = effect_size * (1 - base) / (1 + effect_size)
            return {"r2_change": change, "r2_full": base + change, "f2": effect_size}
        return {"r2": effect_size / (1 + effect_size), "f2": effect_size}


def _composite_legendre(points: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights on (0, 1), ``points`` per piece, pieces shrinking
    geometrically towards both ends (where the chi-square quantile runs off to 0 and infinity)."""
    inner = [1e-12, 1e-9, 1e-6, 1e-4, 1e-2, 0.1, 0.5]
    edges = [0.0, *inner, *[1 - e for e in reversed(inner[:-1])], 1.0]
    base, base_weights = np.polynomial.legendre.leggauss(points)
    nodes, weights = [], []
    for low, high in zip(edges, edges[1:]):
        nodes.append(low + (high - low) * (base + 1) / 2)
        weights.append(base_weights * (high - low) / 2)
    return np.concatenate(nodes), np.concatenate(weights)


_QUADRATURE = _composite_legendre(16)


def _batched_rss(design_matrices: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Residual sum of squares of each ``y[i]`` on its own ``design_matrices[i]`` (QR, batched)."""
    q, _ = np.linalg.qr(design_matrices)
    fitted = np.einsum("bnk,bn->bk", q, y)
    return np.sum(y * y, axis=1) - np.sum(fitted * fitted, axis=1)


def _residual_sum_of_squares(design_matrix: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Least-squares residual sum of squares of every row of ``y`` on the same design matrix."""
    coefficients, *_ = np.linalg.lstsq(design_matrix, y.T, rcond=None)
    residuals = y - (design_matrix @ coefficients).T
    return np.sum(residuals**2, axis=1)
