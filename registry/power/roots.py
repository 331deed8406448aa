"""Brent's method for a root of a function of one variable, without importing ``scipy.optimize``.

``scipy.optimize`` takes a third of a second to import (it loads scipy.sparse, scipy.spatial and
the linear-programming solvers), which ``prespec check`` would pay on every run for the only
function it needs from there: the minimum detectable effect of every spec, the critical values of
many-to-one comparisons and group-sequential boundaries are roots of a monotone function. This
module is the same algorithm as ``scipy.optimize.brentq`` (the same steps in the same order, so
the same iterates and the same answer: ``tests/test_roots.py`` checks it against scipy).

Reference: Brent, R. P. (1973). *Algorithms for Minimization without Derivatives*, chapter 4
(the procedure *zero*). Englewood Cliffs, NJ: Prentice-Hall.
"""

from __future__ import annotations

import math
from collections.abc import Callable

__all__ = ["brentq", "NoBracket", "NotConverged"]

#: scipy.optimize.brentq's defaults.
_XTOL = 2e-12
_RTOL = 4 * 2.220446049250313e-16
_MAXITER = 100


class NoBracket(ValueError):
    """``f(a)`` and ``f(b)`` have the same sign, so the interval need not hold a root."""


class NotConverged(RuntimeError):
    """The root was not located to the asked tolerance within ``maxiter`` steps."""


def brentq(f: Callable[[float], float], a: float, b: float, *, xtol: float = _XTOL, rtol: float = _RTOL,
           maxiter: int = _MAXITER) -> float:
    """A root of ``f`` in ``[a, b]``, where ``f(a)`` and ``f(b)`` have opposite signs.

    Inverse quadratic interpolation or the secant step where it makes good progress, bisection
    where it does not, so the bracket always shrinks; the result ``x`` is within
    ``xtol + rtol * |x|`` of a sign change of ``f``.

    Raises :class:`NoBracket` (a ``ValueError``) when ``f(a)`` and ``f(b)`` have the same sign and
    :class:`NotConverged` (a ``RuntimeError``) after ``maxiter`` steps, as scipy does.

    >>> round(brentq(lambda x: x * x - 2.0, 0.0, 2.0), 12)
    1.414213562373
    """
    if xtol <= 0:
        raise ValueError(f"xtol must be positive; got {xtol!r}")
    if rtol < _RTOL:
        raise ValueError(f"rtol must be at least {_RTOL!r}; got {rtol!r}")
    x_pre, x_cur = float(a), float(b)
    f_pre, f_cur = float(f(x_pre)), float(f(x_cur))
    if f_pre == 0:
        return x_pre
    if f_cur == 0:
        return x_cur
    if math.copysign(1.0, f_pre) == math.copysign(1.0, f_cur):
        raise NoBracket(f"f(a) and f(b) must have different signs; f({a!r}) = {f_pre!r}, f({b!r}) = {f_cur!r}")
    x_blk = f_blk = s_pre = s_cur = 0.0
    for _ in range(maxiter):
        if f_pre != 0 and f_cur != 0 and math.copysign(1.0, f_pre) != math.copysign(1.0, f_cur):
            x_blk, f_blk = x_pre, f_pre  # the other end of the bracket
            s_pre = s_cur = x_cur - x_pre
        if abs(f_blk) < abs(f_cur):  # keep the best guess in x_cur
            x_pre, x_cur, x_blk = x_cur, x_blk, x_cur
            f_pre, f_cur, f_blk = f_cur, f_blk, f_cur
        delta = (xtol + rtol * abs(x_cur)) / 2
        s_bis = (x_blk - x_cur) / 2
        if f_cur == 0 or abs(s_bis) < delta:
            return x_cur
        if abs(s_pre) > delta and abs(f_cur) < abs(f_pre):
            if x_pre == x_blk:  # secant step
                s_try = -f_cur * (x_cur - x_pre) / (f_cur - f_pre)
            else:  # inverse quadratic interpolation
                d_pre = (f_pre - f_cur) / (x_pre - x_cur)
                d_blk = (f_blk - f_cur) / (x_blk - x_cur)
                s_try = -f_cur * (f_blk * d_blk - f_pre * d_pre) / (d_blk * d_pre * (f_blk - f_pre))
            if 2 * abs(s_try) < min(abs(s_pre), 3 * abs(s_bis) - delta):  # a good short step
                s_pre, s_cur = s_cur, s_try
            else:
                s_pre = s_cur = s_bis
        else:
            s_pre = s_cur = s_bis
        x_pre, f_pre = x_cur, f_cur
        x_cur += s_cur if abs(s_cur) > delta else (delta if s_bis > 0 else -delta)
        f_cur = float(f(x_cur))
    raise NotConverged(f"no root to the asked tolerance within {maxiter} steps (last x = {x_cur!r})")
