"""Power of F and chi-square tests from their noncentral distributions (the one place these formulas live)."""

from __future__ import annotations

import numpy as np
from scipy import special

from .roots import brentq

__all__ = ["f_test_power", "chi_square_power", "required_noncentrality"]


def f_test_power(noncentrality: np.ndarray | float, df1: np.ndarray | float, df2: np.ndarray | float,
                 alpha: float) -> np.ndarray:
    """Power of an F test whose statistic follows a noncentral F(df1, df2, noncentrality) under H1.

    Reference: Cohen, J. (1988). *Statistical Power Analysis for the Behavioral Sciences*
    (2nd ed.), chapters 8 and 9. Hillsdale, NJ: Lawrence Erlbaum.

    Examples
    --------
    >>> round(float(f_test_power(0.25**2 * 180, 3, 176, 0.05)), 4)
    0.804
    """
    # scipy.special's ufuncs, as scipy.stats.f.isf and scipy.stats.ncf.sf use them, without loading scipy.stats
    crit = special.fdtri(df1, df2, 1 - alpha)
    return 1 - special.ncfdtr(df1, df2, noncentrality, crit)


def chi_square_power(noncentrality: np.ndarray | float, df: float, alpha: float) -> np.ndarray:
    """Power of a chi-square test whose statistic follows a noncentral chi-square(df, noncentrality).

    Reference: Cohen, J. (1988). *Statistical Power Analysis for the Behavioral Sciences*
    (2nd ed.), chapter 7. Hillsdale, NJ: Lawrence Erlbaum.

    Examples
    --------
    >>> round(float(chi_square_power(0.3**2 * 108, 2, 0.05)), 4)
    0.8037
    """
    crit = special.chdtri(df, alpha)  # scipy.stats.chi2.isf
    return 1 - special.chndtr(crit, df, np.asarray(noncentrality, dtype=float))


def required_noncentrality(df: float, alpha: float, power: float) -> float:
    """Noncentrality a chi-square test on ``df`` needs for ``power``: the large-sample start for F tests.

    >>> round(required_noncentrality(1, 0.05, 0.8), 4)  # (1.959964 + 0.841621)^2
    7.8489
    """
    return brentq(lambda lam: float(chi_square_power(lam, df, alpha)) - power, 0.0, 1e4 + 100 * df,
                           xtol=1e-10)
