"""Group-sequential boundaries by recursive numerical integration, and the spending functions.

The statistic at look ``k`` is ``Z_k = S_k / sqrt(I_k)``, where the score ``S_k`` has independent
normal increments with mean ``theta x (I_k - I_{k-1})`` and variance ``I_k - I_{k-1}``. With the
information fractions ``t_k = I_k / I_K`` and the *drift* ``delta = theta x sqrt(I_K)`` the joint
law of ``(Z_1, ..., Z_K)`` depends on nothing else, so every boundary, crossing probability and
inflation factor here is computed on that scale once and applies to every family whose test
statistic is (asymptotically) normal.

The sub-density of ``Z_k`` on the continuation region is propagated look by look on a grid with
Simpson's rule (Armitage, McPherson & Rowe 1969; Jennison & Turnbull 2000, ch. 19); crossing
probabilities are integrals of normal tail areas against it, so no grid point sits on a
discontinuity. The grid step is at most 0.02 and at most a tenth of the narrowest kernel, which
keeps the crossing probabilities within 1e-8 of a high-precision reference in the tests.

References: Armitage, P., McPherson, C. K., & Rowe, B. C. (1969). Repeated significance tests on
accumulating data. *Journal of the Royal Statistical Society A*, 132(2), 235-244. Lan, K. K. G., &
DeMets, D. L. (1983). Discrete sequential boundaries for clinical trials. *Biometrika*, 70(3),
659-663. Kim, K., & DeMets, D. L. (1987). Design and analysis of group sequential tests based on
the type I error spending rate function. *Biometrika*, 74(1), 149-154. Haybittle, J. L. (1971).
Repeated assessment of results in clinical trials of cancer treatment. *British Journal of
Radiology*, 44, 793-797. Jennison, C., & Turnbull, B. W. (2000). *Group Sequential Methods with
Applications to Clinical Trials*. Boca Raton: Chapman & Hall/CRC.

>>> plan = group_sequential((1/3, 2/3, 1), alpha=0.025, power=0.9, efficacy="obrien-fleming")
>>> [round(b, 3) for b in plan.efficacy]
[3.71, 2.511, 1.993]
>>> round(plan.inflation, 3)
1.012
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal, Sequence

import numpy as np
from scipy import special

from .roots import brentq

__all__ = [
    "SPENDING_FUNCTIONS",
    "SpendingName",
    "FutilityRule",
    "InvalidSequential",
    "GroupSequential",
    "spend",
    "crossing_probabilities",
    "group_sequential",
    "constant_shape_boundaries",
    "equal_fractions",
    "drift_for_power",
]

SpendingName = Literal["obrien-fleming", "pocock", "power", "haybittle-peto"]
FutilityRule = Literal["none", "binding", "non-binding"]

#: Spending functions, with what each does (the spec model and the docs read this).
SPENDING_FUNCTIONS: dict[str, str] = {
    "obrien-fleming": "Lan-DeMets approximation of O'Brien-Fleming: 2 - 2 Phi(z_(1-a/2) / sqrt(t)); spends "
    "almost nothing early",
    "pocock": "Lan-DeMets approximation of Pocock: a ln(1 + (e - 1) t); spends evenly, boundaries nearly flat",
    "power": "the power family a t^rho (Kim & DeMets); rho = 1 is linear, rho = 3 is close to O'Brien-Fleming",
    "haybittle-peto": "z = 3 at every interim look (efficacy only), the final boundary keeps the overall level",
}

_TAIL = 9.0  # the sub-densities are negligible (< 1e-18) beyond 9 SD of the look's mean
_MAX_STEP = 0.02
_HAYBITTLE_PETO_Z = 3.0


class InvalidSequential(ValueError):
    """A sequential design that cannot be computed (bad fractions, rho, or an impossible target)."""

    def __init__(self, message: str, field: str = "design.sequential") -> None:
        super().__init__(message)
        self.message = message
        self.field = field


def equal_fractions(looks: int) -> tuple[float, ...]:
    """Information fractions of ``looks`` equally spaced looks.

    >>> equal_fractions(4)
    (0.25, 0.5, 0.75, 1.0)
    """
    return tuple(k / looks for k in range(1, looks + 1))


def spend(name: str, t: np.ndarray | float, level: float, rho: float | None = None) -> np.ndarray:
    """Cumulative error spent by information fraction ``t`` out of a total ``level``.

    >>> round(float(spend("obrien-fleming", 1.0, 0.025)), 12)
    0.025
    >>> round(float(spend("pocock", 0.5, 0.025)), 6)
    0.015503
    """
    t = np.clip(np.asarray(t, dtype=float), 0.0, 1.0)
    if name == "obrien-fleming":
        z = -special.ndtri(level / 2)
        with np.errstate(divide="ignore"):
            out = 2 * special.ndtr(-z / np.sqrt(t))
        return np.where(t >= 1, level, np.where(t <= 0, 0.0, out))
    if name == "pocock":
        return level * np.log1p((math.e - 1) * t)
    if name == "power":
        if rho is None or not (rho > 0 and math.isfinite(rho)):
            raise InvalidSequential(f"the power spending function needs rho > 0; got {rho!r}")
        return level * t**rho
    raise InvalidSequential(f"{name!r} is not a spending function; choose one of {', '.join(SPENDING_FUNCTIONS)}")


def _simpson(lo: float, hi: float, step: float) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and Simpson weights on ``[lo, hi]`` with spacing at most ``step``."""
    m = max(2, int(math.ceil((hi - lo) / step)))
    m += m % 2
    z = np.linspace(lo, hi, m + 1)
    w = np.ones(m + 1)
    w[1:-1:2] = 4.0
    w[2:-1:2] = 2.0
    return z, w * (hi - lo) / (3 * m)


@dataclass
class _State:
    """The sub-density of Z at one look on its continuation region, times the Simpson weights."""

    z: np.ndarray
    mass: np.ndarray
    t: float


def _start() -> _State:
    return _State(np.zeros(1), np.ones(1), 0.0)


def _standardized(state: _State, t: float, drift: float, bound: float) -> np.ndarray:
    """``(bound sqrt(t) - z sqrt(t_prev) - drift (t - t_prev)) / sqrt(t - t_prev)`` for every node."""
    dt = t - state.t
    return (bound * math.sqrt(t) - state.z * math.sqrt(state.t) - drift * dt) / math.sqrt(dt)


def _upper(state: _State, t: float, drift: float, bound: float) -> float:
    if bound == math.inf:
        return 0.0
    return float(state.mass @ special.ndtr(-_standardized(state, t, drift, bound)))


def _lower(state: _State, t: float, drift: float, bound: float) -> float:
    if bound == -math.inf:
        return 0.0
    return float(state.mass @ special.ndtr(_standardized(state, t, drift, bound)))


def _advance(state: _State, t: float, drift: float, lo: float, hi: float, step: float) -> _State:
    """The sub-density at fraction ``t`` on ``(lo, hi)``, from the one at the previous look."""
    centre = drift * math.sqrt(t)
    lo, hi = max(lo, centre - _TAIL), min(hi, centre + _TAIL)
    if not lo < hi:
        return _State(np.zeros(1), np.zeros(1), t)
    z, w = _simpson(lo, hi, step)
    dt = t - state.t
    scale = math.sqrt(t / dt)
    x = (z[:, None] * math.sqrt(t) - state.z[None, :] * math.sqrt(state.t) - drift * dt) / math.sqrt(dt)
    density = (np.exp(-0.5 * x * x) @ state.mass) * scale / math.sqrt(2 * math.pi)
    return _State(z, density * w, t)


def _steps(fractions: Sequence[float]) -> list[float]:
    """Grid step per look: at most 0.02 and a tenth of the next kernel's width on the z scale."""
    out = []
    for k, t in enumerate(fractions):
        nxt = fractions[k + 1] if k + 1 < len(fractions) else None
        width = 1.0 if nxt is None else math.sqrt((nxt - t) / t)
        out.append(min(_MAX_STEP, width / 10))
    return out


def crossing_probabilities(
    fractions: Sequence[float], upper: Sequence[float], lower: Sequence[float], drift: float
) -> tuple[np.ndarray, np.ndarray]:
    """Probabilities of first crossing the upper and the lower boundary at each look.

    The test continues at look ``k`` while ``lower[k] < Z_k < upper[k]``; ``-inf`` and ``inf``
    mean no boundary. ``drift`` is ``theta sqrt(I_K)`` (0 under the null hypothesis).

    >>> up, low = crossing_probabilities([1.0], [1.959963984540054], [-math.inf], 0.0)
    >>> round(float(up[0]), 12)
    0.025
    """
    fractions = _checked_fractions(fractions)
    state = _start()
    steps = _steps(fractions)
    ups, lows = np.zeros(len(fractions)), np.zeros(len(fractions))
    for k, t in enumerate(fractions):
        ups[k] = _upper(state, t, drift, upper[k])
        lows[k] = _lower(state, t, drift, lower[k])
        if k + 1 < len(fractions):
            state = _advance(state, t, drift, lower[k], upper[k], steps[k])
    return ups, lows


def _checked_fractions(fractions: Sequence[float]) -> list[float]:
    values = [float(t) for t in fractions]
    if not values:
        raise InvalidSequential("give at least one look")
    if any(not math.isfinite(t) or not 0 < t <= 1 for t in values):
        raise InvalidSequential(f"information fractions must be in (0, 1]; got {values}")
    if any(b <= a for a, b in zip(values, values[1:])):
        raise InvalidSequential(f"information fractions must increase from look to look; got {values}")
    if abs(values[-1] - 1.0) > 1e-12:
        raise InvalidSequential(f"the last look must be at information fraction 1 (the maximum n); got {values[-1]:g}")
    if any(b - a < 1e-3 for a, b in zip([0.0] + values, values)):
        raise InvalidSequential(f"looks must be at least 0.001 apart in information; got {values}")
    return values


@dataclass(frozen=True)
class GroupSequential:
    """A group-sequential design on the drift scale: boundaries, inflation and stopping behaviour.

    ``efficacy`` holds the z boundaries (``|Z| >= b`` rejects for a two-sided design); ``futility``
    the lower z boundaries of a one-sided futility rule (``-inf`` where none). Probabilities are of
    stopping at each look, under the null (drift 0) and under the alternative (drift ``drift``).
    """

    fractions: tuple[float, ...]
    alpha: float
    power: float
    two_sided: bool
    efficacy_spending: str
    rho: float | None
    futility: str
    futility_spending: str | None
    futility_rho: float | None
    efficacy: tuple[float, ...]
    futility_bounds: tuple[float, ...]
    drift: float
    fixed_drift: float
    alpha_spent: tuple[float, ...]
    null_efficacy: tuple[float, ...]
    null_futility: tuple[float, ...]
    alt_efficacy: tuple[float, ...]
    alt_futility: tuple[float, ...]
    achieved_power: float
    attained_alpha: float

    @property
    def looks(self) -> int:
        return len(self.fractions)

    @property
    def inflation(self) -> float:
        """Maximum information over the fixed design's: ``(drift / (z_a + z_b))^2``."""
        if self.looks == 1:
            return 1.0
        return (self.drift / self.fixed_drift) ** 2

    def stopping(self, under: str) -> tuple[float, ...]:
        """Probability of stopping at each look (``under`` is ``"null"`` or ``"alternative"``)."""
        up, low = ((self.null_efficacy, self.null_futility) if under == "null"
                   else (self.alt_efficacy, self.alt_futility))
        stop = [u + lo for u, lo in zip(up, low)]
        stop[-1] = 1.0 - sum(stop[:-1])
        return tuple(stop)

    def expected_fraction(self, under: str) -> float:
        """Expected information, as a fraction of the maximum, under the null or the alternative."""
        return float(sum(t * p for t, p in zip(self.fractions, self.stopping(under))))

    def effect_at(self, k: int) -> tuple[float, float | None]:
        """The boundaries of look ``k`` on the effect scale, in units of the effect the design
        was sized for: ``b_k / (drift sqrt(t_k))`` (1 means the planned effect)."""
        scale = self.drift * math.sqrt(self.fractions[k])
        low = self.futility_bounds[k]
        return self.efficacy[k] / scale, (None if low == -math.inf else low / scale)


def _solve_bound(target: float, tail) -> float:
    """The boundary whose crossing probability ``tail(b)`` (decreasing in b) equals ``target``."""
    if target <= 1e-15:
        return math.inf
    low, high = -12.0, 40.0
    if tail(low) <= target:
        return low
    return float(brentq(lambda b: tail(b) - target, low, high, xtol=1e-13, rtol=1e-14, maxiter=400))


def _solve_lower(target: float, tail, upper: float) -> float:
    """The lower boundary whose crossing probability ``tail(a)`` (increasing in a) equals ``target``."""
    if target <= 1e-15:
        return -math.inf
    high = min(upper, 40.0)
    if tail(high) <= target:
        return high
    return float(brentq(lambda a: tail(a) - target, -40.0, high, xtol=1e-13, rtol=1e-14, maxiter=400))


def _efficacy_increments(fractions: list[float], level: float, spending: str, rho: float | None) -> np.ndarray:
    cumulative = spend(spending, np.array(fractions), level, rho)
    cumulative[-1] = level
    return np.diff(np.concatenate([[0.0], cumulative]))


def _null_pass(
    fractions: list[float], level: float, two_sided: bool, spending: str, rho: float | None,
    lower: Sequence[float] | None,
) -> list[float]:
    """Efficacy boundaries under the null: spending per side ``level`` (``lower`` binds if given)."""
    steps = _steps(fractions)
    state = _start()
    bounds: list[float] = []
    increments = None if spending == "haybittle-peto" else _efficacy_increments(fractions, level, spending, rho)
    sides = 2 if two_sided else 1
    used = 0.0
    for k, t in enumerate(fractions):
        low_k = -math.inf if lower is None else lower[k]

        def tail(b: float, s=state, t=t) -> float:
            return _upper(s, t, 0.0, b) + (_lower(s, t, 0.0, -b) if two_sided else 0.0)

        if increments is None:
            b = _HAYBITTLE_PETO_Z if k + 1 < len(fractions) else _solve_bound(sides * level - used, tail)
        else:
            b = _solve_bound(sides * increments[k], tail)
        used += tail(b)
        bounds.append(b)
        if k + 1 < len(fractions):
            state = _advance(state, t, 0.0, -b if two_sided else low_k, b, steps[k])
    return bounds


def _fixed_drift(level: float, power: float) -> float:
    return float(-special.ndtri(level) + special.ndtri(power))


def group_sequential(
    fractions: Sequence[float],
    alpha: float,
    power: float,
    *,
    two_sided: bool = False,
    efficacy: str = "obrien-fleming",
    rho: float | None = None,
    futility: str = "none",
    futility_spending: str | None = None,
    futility_rho: float | None = None,
) -> GroupSequential:
    """Boundaries and the drift that reaches ``power`` for a group-sequential test.

    ``alpha`` is one-sided for ``two_sided=False``; for ``two_sided=True`` it is the two-sided level,
    spent symmetrically (``alpha / 2`` per side, both tails counted under the null). A futility rule
    needs a one-sided test: its lower boundaries spend the type II error ``1 - power`` under the
    alternative (beta spending); ``binding`` futility lowers the efficacy boundaries, ``non-binding``
    keeps those of the design without futility, so the level holds if futility stops are ignored.
    The drift is found so that the last look's futility and efficacy boundaries meet (then power is
    exactly the target); without futility, so that power is the target.
    """
    fractions = _checked_fractions(fractions)
    if not 0 < alpha < 1 or not alpha < power < 1:
        raise InvalidSequential(f"need 0 < alpha < power < 1; got alpha {alpha!r}, power {power!r}")
    if futility not in ("none", "binding", "non-binding"):
        raise InvalidSequential(f"futility must be none, binding or non-binding; got {futility!r}")
    if futility != "none" and two_sided:
        raise InvalidSequential("a futility rule needs a one-sided test: size it at alpha / 2 in the direction "
                                "of the effect", "design.sequential.futility")
    if efficacy not in SPENDING_FUNCTIONS:
        raise InvalidSequential(f"{efficacy!r} is not an efficacy spending function; choose one of "
                                f"{', '.join(SPENDING_FUNCTIONS)}", "design.sequential.efficacy")
    if futility != "none":
        futility_spending = futility_spending or "obrien-fleming"
        if futility_spending == "haybittle-peto":
            raise InvalidSequential("haybittle-peto is an efficacy rule; spend futility with obrien-fleming, pocock "
                                    "or power", "design.sequential.futility_spending")
    level = alpha / 2 if two_sided else alpha
    beta = 1 - power
    fixed = _fixed_drift(level, power)
    k_last = len(fractions) - 1
    steps = _steps(fractions)

    if len(fractions) == 1:
        b = float(-special.ndtri(level))
        return _finish(fractions, alpha, power, two_sided, efficacy, rho, futility, futility_spending, futility_rho,
                       [b], [-math.inf], fixed, fixed)

    free_bounds = _null_pass(fractions, level, two_sided, efficacy, rho, None)

    if futility == "none":
        lows = [-b for b in free_bounds] if two_sided else [-math.inf] * len(fractions)

        def gap(drift: float) -> float:
            up, _ = crossing_probabilities(fractions, free_bounds, lows, drift)
            return float(up.sum()) - power

        drift = _root(gap, fixed)
        return _finish(fractions, alpha, power, two_sided, efficacy, rho, futility, futility_spending, futility_rho,
                       free_bounds, lows, drift, fixed)

    beta_cum = spend(futility_spending, np.array(fractions), beta, futility_rho)
    beta_inc = np.diff(np.concatenate([[0.0], beta_cum]))
    eff_inc = None if efficacy == "haybittle-peto" else _efficacy_increments(fractions, level, efficacy, rho)

    def design_at(drift: float) -> tuple[list[float], list[float], float]:
        """Boundaries for this drift, and the futility bound the last look would need (gap to upper)."""
        upper: list[float] = []
        lower: list[float] = []
        null, alt = _start(), _start()
        alpha_used = beta_used = 0.0
        for k, t in enumerate(fractions):
            if futility == "binding":
                target = (level - alpha_used if (eff_inc is None and k == k_last)
                          else None if eff_inc is None else eff_inc[k])
                b = (_HAYBITTLE_PETO_Z if target is None
                     else _solve_bound(target, lambda x, s=null, t=t: _upper(s, t, 0.0, x)))
                alpha_used += _upper(null, t, 0.0, b)
            else:
                b = free_bounds[k]
            wanted = beta_inc[k] if k < k_last else beta - beta_used
            a = _solve_lower(wanted, lambda x, s=alt, t=t: _lower(s, t, drift, x), b if k < k_last else math.inf)
            beta_used += _lower(alt, t, drift, a)
            upper.append(b)
            lower.append(a)
            if k < k_last:
                if futility == "binding":
                    null = _advance(null, t, 0.0, a, b, steps[k])
                alt = _advance(alt, t, drift, a, b, steps[k])
        return upper, lower, lower[-1] - upper[-1]

    drift = _root(lambda d: design_at(d)[2], fixed)
    upper, lower, _ = design_at(drift)
    lower[-1] = upper[-1]
    return _finish(fractions, alpha, power, two_sided, efficacy, rho, futility, futility_spending, futility_rho,
                   upper, lower, drift, fixed)


def _root(gap, start: float) -> float:
    """Solve ``gap(drift) = 0`` for a gap increasing in drift, bracketing from ``start``."""
    low, high = start * 0.9, start * 1.6
    while gap(low) > 0:
        low *= 0.7
    while gap(high) < 0:
        high *= 1.5
        if high > 100:
            raise InvalidSequential("no maximum information reaches the target power with these boundaries")
    return float(brentq(gap, low, high, xtol=1e-11, rtol=1e-13, maxiter=200))


def _finish(fractions, alpha, power, two_sided, efficacy, rho, futility, futility_spending, futility_rho,
            upper, lower, drift, fixed) -> GroupSequential:
    lows_null = [-b for b in upper] if two_sided else list(lower)
    null_up, null_low = crossing_probabilities(fractions, upper, lows_null if futility != "non-binding" else
                                               [-math.inf] * len(upper), 0.0)
    if futility == "non-binding":  # the level is that of the efficacy boundaries alone; stops include futility
        null_up_f, null_low_f = crossing_probabilities(fractions, upper, lower, 0.0)
    else:
        null_up_f, null_low_f = null_up, null_low
    alt_up, alt_low = crossing_probabilities(fractions, upper, lows_null if two_sided else lower, drift)
    attained = float(null_up.sum() + (null_low.sum() if two_sided else 0.0))
    futility_bounds = tuple([-math.inf] * len(upper)) if (two_sided or futility == "none") else tuple(lower)
    null_eff = tuple(float(x) for x in (null_up_f + null_low_f if two_sided else null_up_f))
    null_fut = tuple(0.0 for _ in upper) if two_sided else tuple(float(x) for x in null_low_f)
    return GroupSequential(
        fractions=tuple(fractions), alpha=alpha, power=power, two_sided=two_sided, efficacy_spending=efficacy,
        rho=rho, futility=futility, futility_spending=futility_spending if futility != "none" else None,
        futility_rho=futility_rho if futility != "none" else None,
        efficacy=tuple(float(b) for b in upper), futility_bounds=futility_bounds, drift=float(drift),
        fixed_drift=float(fixed),
        alpha_spent=tuple(float(x) for x in np.cumsum(null_up + (null_low if two_sided else 0.0))),
        null_efficacy=null_eff, null_futility=null_fut,
        alt_efficacy=tuple(float(x) for x in alt_up),
        alt_futility=tuple(0.0 for _ in upper) if two_sided else tuple(float(x) for x in alt_low),
        achieved_power=float(alt_up.sum()), attained_alpha=attained,
    )


def constant_shape_boundaries(fractions: Sequence[float], alpha: float, shape: float, *,
                              two_sided: bool = True) -> tuple[float, tuple[float, ...]]:
    """Wang-Tsiatis boundaries ``b_k = C t_k^(shape - 1/2)`` with the constant ``C`` that gives level
    ``alpha`` (``shape`` 0.5 is Pocock's test, 0 O'Brien and Fleming's). Returns ``(C, bounds)``.

    Reference: Wang, S. K., & Tsiatis, A. A. (1987). Approximately optimal one-parameter boundaries
    for group sequential trials. *Biometrics*, 43(1), 193-199.
    """
    fractions = _checked_fractions(fractions)
    ts = np.array(fractions)

    def level(c: float) -> float:
        bounds = list(c * ts ** (shape - 0.5))
        lows = [-b for b in bounds] if two_sided else [-math.inf] * len(bounds)
        up, low = crossing_probabilities(fractions, bounds, lows, 0.0)
        return float(up.sum() + (low.sum() if two_sided else 0.0)) - alpha

    c = float(brentq(level, 0.5, 10.0, xtol=1e-12, rtol=1e-14))
    return c, tuple(float(x) for x in c * ts ** (shape - 0.5))


def drift_for_power(fractions: Sequence[float], upper: Sequence[float], lower: Sequence[float], power: float,
                    start: float) -> float:
    """The drift at which boundaries ``upper``/``lower`` (fixed) reject with probability ``power``."""
    return _root(lambda d: float(crossing_probabilities(fractions, upper, lower, d)[0].sum()) - power, start)
