"""Owen's Q function and the exact power of two one-sided t-tests (TOST) built on it."""

from __future__ import annotations

import math

import numpy as np
from scipy import integrate, stats

__all__ = ["owens_q", "tost_power"]


def owens_q(df: float, t: float, delta: float, a: float, b: float) -> float:
    """Owen's Q function ``Q_df(t, delta; a, b)``, by adaptive quadrature.

    ``Q = integral from a to b of Phi(t x / sqrt(df) - delta) chi_df(x) dx``, with ``chi_df``
    the density of the chi distribution. Over ``[0, inf)`` it is the noncentral t distribution
    function ``P(T_{df, delta} <= t)``. The integral is limited to where the chi density is
    not negligible (beyond its 1e-15 quantiles).

    Reference: Owen, D. B. (1965). A special case of a bivariate non-central t-distribution.
    *Biometrika*, 52(3/4), 437-446.

    >>> round(owens_q(10, 2.0, 1.0, 0.0, math.inf), 10) == round(float(stats.nct.cdf(2.0, 10, 1.0)), 10)
    True
    """
    chi = stats.chi(df)
    low = max(a, float(chi.ppf(1e-15)))
    high = min(b, float(chi.isf(1e-15)))
    if high <= low:
        return 0.0
    root = math.sqrt(df)

    def integrand(x: float) -> float:
        return float(stats.norm.cdf(t * x / root - delta) * chi.pdf(x))

    points = [delta * root / t] if t != 0 and low < delta * root / t < high else None
    value, _ = integrate.quad(integrand, low, high, points=points, limit=200, epsabs=1e-13, epsrel=1e-11)
    return value


def tost_power(lower: float, upper: float, difference: float, n1: np.ndarray, n2: np.ndarray,
               alpha: float) -> np.ndarray:
    """Exact power of two one-sided pooled t-tests at level ``alpha`` each (TOST).

    The margins and the true ``difference`` are in SD units. With ``se = sqrt(1/n1 + 1/n2)``,
    ``df = n1 + n2 - 2`` and ``t = t_{1 - alpha, df}``, equivalence is shown when
    ``(D - lower) / SE >= t`` and ``(D - upper) / SE <= -t``; its probability is

    ``Q_df(-t, delta_2; 0, R) - Q_df(t, delta_1; 0, R)``,

    ``delta_1 = (difference - lower) / se``, ``delta_2 = (difference - upper) / se``,
    ``R = sqrt(df) (delta_1 - delta_2) / (2 t)``.

    Reference: Phillips, K. F. (1990). Power of the two one-sided tests procedure in
    bioequivalence. *Journal of Pharmacokinetics and Biopharmaceutics*, 18(2), 137-144.

    >>> round(float(tost_power(-0.5, 0.5, 0.0, np.array([70]), np.array([70]), 0.05)[0]), 4)
    0.8059
    """
    n1 = np.atleast_1d(np.asarray(n1, dtype=float))
    n2 = np.broadcast_to(np.asarray(n2, dtype=float), n1.shape)
    out = np.empty(n1.shape)
    for i, (a, b) in enumerate(zip(n1, n2)):
        se = math.sqrt(1 / a + 1 / b)
        df = a + b - 2
        t = float(stats.t.isf(alpha, df))
        delta1 = (difference - lower) / se
        delta2 = (difference - upper) / se
        reach = math.sqrt(df) * (delta1 - delta2) / (2 * t)
        power = owens_q(df, -t, delta2, 0.0, reach) - owens_q(df, t, delta1, 0.0, reach)
        out[i] = min(max(power, 0.0), 1.0)
    return out
