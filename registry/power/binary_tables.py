"""Exact power of tests comparing two independent binomial groups, by enumerating their tables.

With ``n1`` and ``n2`` units, every possible experiment is a 2 x 2 table ``(x1, x2)``, the
number of units with the outcome in each group; it occurs with probability
``b(x1; n1, p1) b(x2; n2, p2)``. The power of a test is the total probability of the tables it
rejects, so it is computed exactly by deciding the test on every table:

    power = sum over (x1, x2) of b(x1; n1, p1) b(x2; n2, p2) [test rejects (x1, x2)]

Tables whose binomial probability is below ``1e-16`` in either group are left out (together at
most ``4e-16`` of probability), so the sum is exact to 15 decimals while the grid grows only
like ``n`` rather than ``n^2`` for large groups.

The tests, as a lab runs them (group 1 the control with ``x1`` of ``n1``, group 2 the treatment):

* ``pooled``: the z statistic ``(x2/n2 - x1/n1) / sqrt(pbar (1 - pbar)(1/n1 + 1/n2))`` with the
  pooled proportion ``pbar``; two-sided it is Pearson's chi-square test without correction
  (``scipy.stats.chi2_contingency(table, correction=False)``);
* ``corrected``: the same with ``|x2/n2 - x1/n1|`` reduced by ``(1/n1 + 1/n2)/2`` (never past 0):
  two-sided, Yates' corrected chi-square (``chi2_contingency(table)``);
* ``arcsine``: ``(2 asin sqrt(x2/n2) - 2 asin sqrt(x1/n1)) / sqrt(1/n1 + 1/n2)``;
* ``fisher``: Fisher's exact test, conditional on the total ``t = x1 + x2``; one-sided the
  hypergeometric tail, two-sided the sum of the probabilities of the tables with that total that
  are no more probable than the observed one (``scipy.stats.fisher_exact``). Probabilities within a
  relative ``1e-7`` count as equal, so tables of equal probability are always counted together.

A z test rejects when the statistic reaches the normal critical value (``alpha/2`` per side
two-sided), Fisher's test when its p-value is at most ``alpha``; a table with no unit with the
outcome, or no unit without it, is never rejected.

References: Fisher, R. A. (1935). The logic of inductive inference. *Journal of the Royal
Statistical Society*, 98(1), 39-82. Yates, F. (1934). Contingency tables involving small
numbers and the chi-square test. *Supplement to the Journal of the Royal Statistical Society*,
1(2), 217-235.

>>> round(float(exact_power("fisher", 10, 10, 0.1, 0.7, 0.05, "two-sided")), 4)
0.6669
"""

from __future__ import annotations

import math
from typing import Literal

import numpy as np
from scipy import special

__all__ = ["BinaryTest", "exact_power", "rejects", "fisher_pvalues", "enumeration_cells", "EXACT_CELLS"]

BinaryTest = Literal["pooled", "corrected", "arcsine", "fisher"]

_TAIL = 1e-16  # binomial probability left out in each tail of each group
#: Tables (z-test equivalents) one exact power may enumerate; beyond, the families use the normal
#: approximation, which at such sizes (thousands per group) agrees with the enumeration to about 1e-3.
EXACT_CELLS = 2_000_000
_FISHER_COST = 15  # deciding Fisher's test on a table costs about 15 z-test decisions (measured)


def enumeration_cells(test: str, n1: int, n2: int, p1: float, p2: float) -> float:
    """About how many tables (in z-test equivalents) :func:`exact_power` decides for these groups:
    each group's support spans about 16.6 binomial SDs (the ``1e-16`` tails left out).

    >>> enumeration_cells("pooled", 10, 10, 0.5, 0.5)
    121.0
    """
    def width(n: int, p: float) -> float:
        return min(n + 1.0, 16.6 * math.sqrt(n * p * (1 - p)) + 2.0)

    return width(n1, p1) * width(n2, p2) * (_FISHER_COST if test == "fisher" else 1)
_TIE = 1e-7  # relative difference under which two table probabilities count as equal


def _log_choose(n: float, k: np.ndarray) -> np.ndarray:
    return special.gammaln(n + 1) - special.gammaln(k + 1) - special.gammaln(n - k + 1)


def _binom_pmf(k: np.ndarray, n: int, p: float) -> np.ndarray:
    return np.exp(_log_choose(n, k) + special.xlogy(k, p) + special.xlog1py(n - k, -p))


def _support(n: int, p: float) -> np.ndarray:
    """The counts 0..n holding all but at most ``2 x _TAIL`` of Binomial(n, p)."""
    k = np.arange(n + 1, dtype=float)
    pmf = _binom_pmf(k, n, p)
    cdf = np.cumsum(pmf)
    low = int(np.searchsorted(cdf, _TAIL, side="right"))
    sf = np.cumsum(pmf[::-1])[::-1]
    high = n - int(np.searchsorted(sf[::-1], _TAIL, side="right"))
    low = max(0, min(low, high))
    return np.arange(low, high + 1)


def _critical(alpha: float, alternative: str) -> float:
    return float(-special.ndtri(alpha / (2 if alternative == "two-sided" else 1)))


def _z_rejects(test: str, x1: np.ndarray, x2: np.ndarray, n1: int, n2: int, alpha: float,
               alternative: str) -> np.ndarray:
    q1, q2 = x1 / n1, x2 / n2
    if test == "arcsine":
        z = (2 * np.arcsin(np.sqrt(q2)) - 2 * np.arcsin(np.sqrt(q1))) / math.sqrt(1 / n1 + 1 / n2)
    else:
        pooled = (x1 + x2) / (n1 + n2)
        se = np.sqrt(pooled * (1 - pooled) * (1 / n1 + 1 / n2))
        diff = q2 - q1
        if test == "corrected":
            diff = np.sign(diff) * np.maximum(np.abs(diff) - (1 / n1 + 1 / n2) / 2, 0.0)
        safe = np.where(se > 0, se, 1.0)
        z = np.where(se > 0, diff / safe, 0.0)
    crit = _critical(alpha, alternative)
    if alternative == "greater":
        return z >= crit
    if alternative == "less":
        return z <= -crit
    return np.abs(z) >= crit


def _conditional_support(ts: np.ndarray, x1: np.ndarray, n1: int, n2: int) -> np.ndarray:
    """Counts of group 1 that carry all but a negligible part (far below 1e-16) of the conditional
    (hypergeometric) distribution for every total in ``ts``, together with the counts in ``x1``.

    The hypergeometric distribution is at least as concentrated as the binomial with the same mean
    (Hoeffding 1963), so 14 standard deviations and 12 counts beyond the mean leave out nothing a
    p-value could show.
    """
    big = n1 + n2
    t = ts.astype(float)
    mean = t * n1 / big
    sd = np.sqrt(t * (big - t) * n1 * n2 / (big * big * max(big - 1, 1)))
    low = int(max(0, min(x1.min(), np.floor((mean - 14 * sd).min()) - 12)))
    high = int(min(n1, max(x1.max(), np.ceil((mean + 14 * sd).max()) + 12)))
    return np.arange(low, high + 1)


def fisher_pvalues(x1: np.ndarray, x2: np.ndarray, n1: int, n2: int, alternative: str) -> np.ndarray:
    """Fisher's exact p-values of the tables ``(x1[i], x2[j])`` (a ``len(x1) x len(x2)`` grid).

    ``greater`` is the alternative ``p2 > p1`` (few outcomes in group 1 given the total).

    >>> float(fisher_pvalues(np.array([1]), np.array([7]), 8, 8, "two-sided")[0, 0])  # doctest: +ELLIPSIS
    0.0101...
    """
    x1 = np.asarray(x1)
    x2 = np.asarray(x2)
    total = x1[:, None] + x2[None, :]
    ts = np.arange(int(total.min()), int(total.max()) + 1)
    k = _conditional_support(ts, x1, n1, n2).astype(float)
    # Conditional log probability of k outcomes in group 1 given each total t (rows), -inf off support.
    valid = (k[None, :] <= ts[:, None]) & (ts[:, None] - k[None, :] <= n2)
    t_col = ts[:, None].astype(float)
    other = np.where(valid, t_col - k[None, :], 0.0)
    logp = np.where(valid, _log_choose(n1, k)[None, :] + _log_choose(n2, other)
                    - _log_choose(n1 + n2, t_col), -np.inf)
    pmf = np.exp(logp)
    row = total - ts[0]
    first = int(k[0])
    if alternative == "greater":
        table = np.cumsum(pmf, axis=1)
        p = table[row, x1[:, None] - first]
    elif alternative == "less":
        table = np.cumsum(pmf[:, ::-1], axis=1)[:, ::-1]
        p = table[row, x1[:, None] - first]
    else:
        order = np.argsort(logp, axis=1, kind="stable")  # ascending; -inf (off support) first
        ranked = np.take_along_axis(logp, order, axis=1)
        cum = np.cumsum(np.exp(ranked), axis=1)
        # Each entry's p-value is the cumulative probability up to the last entry tied with it.
        with np.errstate(invalid="ignore"):
            gap = np.diff(ranked, axis=1) > _TIE
        last = np.ones(ranked.shape, dtype=bool)
        last[:, :-1] = gap
        index = np.where(last, np.arange(len(k))[None, :], len(k))
        group_end = np.minimum.accumulate(index[:, ::-1], axis=1)[:, ::-1]
        by_rank = np.take_along_axis(cum, group_end, axis=1)
        by_k = np.empty_like(by_rank)
        np.put_along_axis(by_k, order, by_rank, axis=1)
        p = by_k[row, x1[:, None] - first]
    return np.minimum(p, 1.0)


def rejects(test: BinaryTest, x1: np.ndarray, x2: np.ndarray, n1: int, n2: int, alpha: float,
            alternative: str) -> np.ndarray:
    """Whether ``test`` rejects H0 on each table ``(x1[i], x2[j])``: a boolean ``len(x1) x len(x2)`` grid."""
    x1 = np.asarray(x1)
    x2 = np.asarray(x2)
    if test == "fisher":
        return fisher_pvalues(x1, x2, n1, n2, alternative) <= alpha * (1 + 1e-12)
    return _z_rejects(test, x1[:, None].astype(float), x2[None, :].astype(float), n1, n2, alpha, alternative)


def exact_power(test: BinaryTest, n1: int, n2: int, p1: float, p2: float, alpha: float, alternative: str) -> float:
    """Probability that ``test`` rejects H0 with ``n1`` and ``n2`` units and true proportions ``p1``, ``p2``."""
    x1 = _support(n1, p1)
    x2 = _support(n2, p2)
    grid = rejects(test, x1, x2, n1, n2, alpha, alternative)
    w1 = _binom_pmf(x1.astype(float), n1, p1)
    w2 = _binom_pmf(x2.astype(float), n2, p2)
    return float(w1 @ grid.astype(float) @ w2)
