"""Generic solvers shared by every family: smallest n, power at n, minimum detectable effect."""

from __future__ import annotations

import math
from typing import Callable

import numpy as np
from scipy import optimize

from .base import MAX_N, DesignBase, Family, InfeasibleDesign
from .results import PowerAtN, SampleSize

__all__ = ["smallest_n", "solve_sample_size", "power_at", "power_of", "minimum_effect", "enrolment"]

_BLOCK = 8  # candidates evaluated at once around the normal-approximation start


def enrolment(n: int, attrition: float) -> int:
    """Units to enrol so that ``n`` remain after losing a fraction ``attrition``."""
    if attrition <= 0:
        return n
    return math.ceil(n / (1 - attrition) - 1e-9)


def smallest_n(
    power_of: Callable[[np.ndarray], np.ndarray], target: float, start: float, lo: int, hi: int = MAX_N
) -> tuple[int, float]:
    """Smallest integer n in [lo, hi] with ``power_of(n) >= target``, for power increasing in n.

    Evaluates a block of candidates around ``start`` in one vectorized call; only when the
    start is far off does it fall back to doubling steps and bisection.
    """
    first = int(min(max(math.floor(start) - 2, lo), hi))
    cand = np.arange(first, min(first + _BLOCK, hi + 1))
    p = power_of(cand)
    if p[0] < target <= p[-1]:
        i = int(np.argmax(p >= target))
        return int(cand[i]), float(p[i])
    if p[0] >= target:  # start too high: step down until power falls below target
        high, step = int(cand[0]), 1
        while high > lo:
            low = max(lo, high - step)
            if float(power_of(np.array([low]))[0]) < target:
                break
            high, step = low, step * 2
        else:
            return lo, float(power_of(np.array([lo]))[0])
    else:  # start too low: step up
        low, step = int(cand[-1]), max(_BLOCK, int(cand[-1]) // 4)
        while True:
            high = min(hi, low + step)
            if float(power_of(np.array([high]))[0]) >= target:
                break
            if high >= hi:
                raise InfeasibleDesign(
                    f"no sample size up to {hi:,} per group reaches the target power; "
                    "the effect is too small for this design"
                )
            low, step = high, step * 2
    while high - low > _BLOCK * 4:
        mid = (low + high) // 2
        if float(power_of(np.array([mid]))[0]) >= target:
            high = mid
        else:
            low = mid
    cand = np.arange(low + 1, high + 1)
    p = power_of(cand)
    i = int(np.argmax(p >= target))
    return int(cand[i]), float(p[i])


def _checked_effect(family: Family, design: DesignBase) -> float:
    es = family.effect_size(design)
    family.check_direction(design, es)
    return es


def solve_sample_size(design: DesignBase, effect_size: float | None = None) -> SampleSize:
    """The smallest analysable n reaching ``design.power``, with enrolment after attrition.

    ``effect_size`` replaces the design's standardized effect (what-if analyses).
    """
    family = design.family
    es = _checked_effect(family, design) if effect_size is None else effect_size
    family.check_direction(design, es)  # a what-if effect must point the same way
    start = family.approximate_n(design, es)
    if not math.isfinite(start) or start > MAX_N:
        raise InfeasibleDesign(
            f"the effect ({family.symbol} = {es:.4g}) is too small: more than {MAX_N:,} per group would be needed"
        )
    n, achieved = smallest_n(lambda n: family.power(design, n, es), design.power, start, family.min_n)
    sizes = family.group_sizes(design, n)
    enrolled = tuple(enrolment(g, design.attrition) for g in sizes)
    return SampleSize(
        test=family.name,
        n_per_group=n,
        n_total=sum(sizes),
        achieved_power=achieved,
        target_power=design.power,
        alpha=design.alpha,
        alternative=design.alternative,
        effect_size=es,
        symbol=family.symbol,
        group_sizes=sizes,
        enrolment_per_group=enrolled[0],
        enrolment_total=sum(enrolled),
        unit=family.unit,
        method=family.method,
        reference=family.reference,
    )


def power_of(design: DesignBase, n: np.ndarray, effect_size: float | None = None) -> np.ndarray:
    """Power at each analysable n per group (vectorized), at the design's effect or at ``effect_size``.

    >>> from registry.power import design_from_params
    >>> [round(float(p), 4) for p in power_of(design_from_params("two-sample-t", d=0.5), [64, 86], 0.5)]
    [0.8015, 0.9032]
    """
    family = design.family
    es = family.effect_size(design) if effect_size is None else effect_size
    return family.power(design, np.asarray(n, dtype=float), es)


def minimum_effect(design: DesignBase, n: int) -> float | None:
    """Smallest standardized effect (in the design's direction) reaching the target power at n."""
    family = design.family
    es = family.effect_size(design)
    sign = -1.0 if (design.alternative == "less" or (design.alternative == "two-sided" and es < 0)) else 1.0

    def gap(magnitude: float) -> float:
        return float(family.power(design, np.array([n]), sign * magnitude)[0]) - design.power

    high = 1.0
    while gap(high) < 0:
        high *= 2
        if high > 1e6:
            return None
    low = 0.0
    return sign * optimize.brentq(gap, low, high, xtol=1e-10, rtol=1e-10)


def power_at(design: DesignBase, n: int) -> PowerAtN:
    """Power of the design at ``n`` analysable units per group, and its minimum detectable effect."""
    family = design.family
    if n < family.min_n:
        raise InfeasibleDesign(f"n must be at least {family.min_n} for the {family.title}; got {n}", "n")
    es = _checked_effect(family, design)
    mde = minimum_effect(design, n)
    sizes = family.group_sizes(design, n)
    return PowerAtN(
        test=family.name,
        n_per_group=n,
        n_total=sum(sizes),
        power=float(family.power(design, np.array([n]), es)[0]),
        alpha=design.alpha,
        alternative=design.alternative,
        target_power=design.power,
        effect_size=es,
        symbol=family.symbol,
        minimum_detectable_effect=mde,
        minimum_detectable_natural=family.natural_effect(design, mde) if mde is not None else {},
        group_sizes=sizes,
        unit=family.unit,
    )
