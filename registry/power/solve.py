"""Generic solvers shared by every family: smallest n, power at n, minimum detectable effect."""

from __future__ import annotations

import math
from typing import Any, Callable

import numpy as np
from .roots import brentq

from .base import MAX_N, DesignBase, EventsOnly, Family, InfeasibleDesign
from .results import PowerAtN, SampleSize

__all__ = ["smallest_n", "smallest_n_pointwise", "smallest_n_from_which", "solve_sample_size", "checked_effect",
           "power_at", "power_of", "minimum_effect", "enrolment"]

_BLOCK = 8  # candidates evaluated at once around the normal-approximation start
_SCAN_LIMIT = 5_000_000  # largest n a non-monotone family's exhaustive scan may reach
_SCAN_CHUNK = 100_000  # candidates evaluated per vectorized call during that scan
#: Tables (z-test equivalents) the whole scan may enumerate; beyond, only a window around the
#: crossing found by bisection is scanned (a full scan at thousands per group takes minutes).
_SCAN_CELLS = 60_000_000


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
                raise _unreachable(hi)
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


def _unreachable(hi: int) -> InfeasibleDesign:
    """What both size searches raise when no n up to ``hi`` reaches the target."""
    return InfeasibleDesign(f"no sample size up to {hi:,} per group reaches the target power; "
                            "the effect is too small for this design")


def smallest_n_pointwise(
    power_of: Callable[[np.ndarray], np.ndarray], target: float, start: float, lo: int, hi: int = MAX_N
) -> tuple[int, float]:
    """The same answer as :func:`smallest_n`, for power whose every n costs a separate computation
    (an expected epsilon, an assurance integral): no block of candidates, one n at a time.

    Brackets the crossing from ``ceil(start)`` by steps that double (1, 2, 4, ...), then narrows it
    by interpolation in (sqrt(n), probit(power)), where power curves are nearly straight, falling back
    to bisection whenever an interpolated step fails to halve the bracket. For a good start this
    costs two evaluations (the start and its neighbour) instead of a block of eight.
    """
    from scipy.special import ndtri

    memo: dict[int, float] = {}

    def at(k: int) -> float:
        if k not in memo:
            memo[k] = float(power_of(np.array([k]))[0])
        return memo[k]

    def probit(p: float) -> float:
        return float(ndtri(min(max(p, 1e-12), 1 - 1e-12)))

    first = int(min(max(math.ceil(start) if math.isfinite(start) else hi, lo), hi))
    step = 1
    if at(first) >= target:  # step down until power falls below the target
        high = first
        while True:
            if high <= lo:
                return lo, at(lo)
            low = max(lo, high - step)
            if at(low) < target:
                break
            high, step = low, step * 2
    else:  # step up until it reaches the target
        low = first
        while True:
            if low >= hi:
                raise _unreachable(hi)
            high = min(hi, low + step)
            if at(high) >= target:
                break
            low, step = high, step * 2
    z_target = probit(target)
    width_before = None
    while high - low > 1:
        width = high - low
        mid = None
        if width_before is None or 2 * width <= width_before:  # the last step halved the bracket
            z_low, z_high = probit(at(low)), probit(at(high))
            if z_high > z_low:
                r_low, r_high = math.sqrt(low), math.sqrt(high)
                guess = (r_low + (z_target - z_low) * (r_high - r_low) / (z_high - z_low)) ** 2
                mid = min(max(math.ceil(guess - 1e-9), low + 1), high - 1)
        if mid is None:
            mid = (low + high) // 2
        width_before = width if mid != (low + high) // 2 else None
        if at(mid) >= target:
            high = mid
        else:
            low = mid
    return high, at(high)


def smallest_n_from_which(
    power_of: Callable[[np.ndarray], np.ndarray], target: float, bound: int, lo: int
) -> tuple[int, int | None, int]:
    """For power that is not monotone in n (exact tests on discrete data): scan every n in
    ``[lo, bound]`` and return ``(stable, first, bound)``: the smallest n from which every n up
    to the bound reaches ``target``, and the first n reaching it if that is smaller, else None.

    ``bound`` is where a smooth approximation puts power far above the target; the scan is
    extended (doubling) until the stable n lies in the lower two thirds of the scanned range,
    so every n from the answer to at least 1.5 times the answer was checked and reaches the target.
    """
    first: int | None = None
    last_failure = lo - 1
    scanned = lo - 1
    while True:
        while scanned < bound:
            cand = np.arange(scanned + 1, min(bound, scanned + _SCAN_CHUNK) + 1)
            reached = power_of(cand) >= target
            if first is None and reached.any():
                first = int(cand[np.argmax(reached)])
            if not reached.all():
                last_failure = int(cand[len(cand) - 1 - np.argmax(~reached[::-1])])
            scanned = int(cand[-1])
        stable = last_failure + 1
        if stable <= lo + (bound - lo) * 2 // 3:
            return stable, (first if first is not None and first < stable else None), bound
        if bound >= _SCAN_LIMIT:
            raise InfeasibleDesign(
                f"power does not settle above the target below n = {_SCAN_LIMIT:,}; "
                "the effect is too small for an exact discrete test"
            )
        bound = min(_SCAN_LIMIT, bound * 2)


def _checked_effect(family: Family, design: DesignBase) -> float:
    es = family.effect_size(design)
    family.check_direction(design, es)
    return es


def checked_effect(design: DesignBase) -> float:
    """The standardized effect of ``design`` as tested, after the family's checks of the effect and its
    direction: what :func:`solve_sample_size` refuses before any sizing (an explicit ``alternative``
    where the family takes none, a one-sided alternative pointing the wrong way, a zero effect)."""
    return _checked_effect(design.family, design.as_tested())


def _shared_notes(design: DesignBase) -> list[str]:
    """Notes on the adjustments made here for every family (multiplicity, clusters, attrition)."""
    notes = []
    if design.multiplicity is not None:
        k = design.multiplicity.outcomes
        notes.append(
            f"{k} primary outcomes: each is tested at alpha / {k} = {design.effective_alpha:.4g} (Bonferroni), "
            f"keeping the familywise error at {design.alpha:g}; Holm's step-down procedure keeps it too and is "
            "uniformly more powerful, so this sizing is conservative if the analysis uses Holm. If every outcome "
            "must succeed (co-primary in the strict sense), no split is needed but the joint power is lower "
            "than the per-outcome power"
        )
    if design.cluster is not None and _by_cluster_means(design.family, design):
        notes.append(design.family.cluster_note(design))
    elif design.cluster is not None:
        c = design.cluster
        notes.append(
            f"{c.described}: the individual-level n "
            f"is multiplied by the design effect {c.design_effect_formula} = {design.design_effect:.4g}, "
            "then enrolment is allowed for attrition and rounded up to whole clusters. The design effect assumes "
            "many clusters; with few clusters per group a cluster-level analysis has fewer degrees of freedom "
            "and somewhat less power"
        )
    return notes


def _method(family: Family, design: DesignBase) -> str:
    """The method of a size: the family's, or for a clustered design sized by the design effect, that
    approximation first (the family's own method, exact or not, gives only the individual-level n)."""
    if design.cluster is None:
        return family.method
    if _by_cluster_means(family, design):
        return family.cluster_method(design)
    return (f"design-effect approximation: the individual-level n times the design effect "
            f"{design.design_effect:.4g} (assumes many clusters); the individual-level n: {family.method}")


def _by_cluster_means(family: Family, design: DesignBase) -> bool:
    """Whether a clustered design is sized by the family's test on cluster means."""
    return design.cluster is not None and family.cluster_means


def _power_fn(family: Family, tested: DesignBase) -> Callable[[np.ndarray, float], np.ndarray]:
    """Power at analysable units per group: on cluster means (whole clusters of ``cluster.size``
    units) where the family offers it, else the family's own power at that many units."""
    if _by_cluster_means(family, tested):
        assert tested.cluster is not None
        m = tested.cluster.size

        def on_means(n: np.ndarray, es: float) -> np.ndarray:
            k = np.floor(np.asarray(n, dtype=float) / m + 1e-9)
            ok = k >= 2
            out = np.zeros(k.shape)
            if ok.any():
                out[ok] = family.cluster_power(tested, k[ok], es)
            return out

        return on_means
    return lambda n, es: family.power(tested, n, es)


def _clustered(design: DesignBase, n_individual: int) -> int:
    """Analysable units in group 1 once the design effect is applied: ``ceil(n * DE)``."""
    if design.cluster is None:
        return n_individual
    return math.ceil(n_individual * design.design_effect - 1e-9)


def _individual(design: DesignBase, n: int) -> int:
    """The individual-level n that ``n`` clustered units are worth: ``floor(n / DE)``."""
    if design.cluster is None:
        return n
    return math.floor(n / design.design_effect + 1e-9)


def _start(family: Family, design: DesignBase, es: float) -> float:
    """The family's normal-approximation n, ``inf`` when an effect so small that its square underflows
    makes the formula divide by zero (the caller then says the effect is too small)."""
    with np.errstate(divide="ignore", over="ignore", invalid="ignore", under="ignore"):
        try:
            return float(family.approximate_n(design, es))
        except (ZeroDivisionError, OverflowError):
            return math.inf


def solve_sample_size(design: DesignBase, effect_size: float | None = None) -> SampleSize:
    """The smallest analysable n reaching ``design.power``, with enrolment after attrition.

    ``effect_size`` replaces the design's standardized effect (what-if analyses); it must
    point the same way as the design's alternative.

    The adjustments shared by every family are made here, in this order:

    1. multiplicity: the family sees a copy of the design with ``alpha`` replaced by the
       per-test level (:meth:`DesignBase.as_tested`) and finds the smallest individual-level n;
    2. clustering: group 1 needs ``ceil(n x design effect)`` analysable units, group 2 follows
       the allocation ratio;
    3. attrition: each group enrols ``ceil(analysable / (1 - attrition))`` units;
    4. clustering again: enrolment is rounded up to whole clusters of ``cluster.size`` units.

    Attrition is applied after the design effect because units drop out of clusters, not whole
    clusters; the design effect uses the planned cluster size, which is conservative when dropouts
    leave clusters smaller.
    """
    family = design.family
    tested = design.as_tested()
    es = _checked_effect(family, tested) if effect_size is None else effect_size
    if effect_size is not None:
        family.check_direction(tested, es)
    if family.events_only(tested):
        events = family.required_events(tested, es)
        assert events is not None
        needed = math.ceil(events * design.design_effect - 1e-9)
        raise EventsOnly(needed, (
            f"the {family.title} needs {needed:,} events ({family.method}); how many units to enrol depends on "
            "how many of them have the event before the analysis: give event_probability, or median_control with "
            "accrual and follow_up (exponential survival, uniform accrual), to turn events into units"))
    start = _start(family, tested, es)
    if not math.isfinite(start) or start > MAX_N:
        raise InfeasibleDesign(
            f"the effect ({family.symbol_for(design)} = {es:.4g}) is too small: more than {MAX_N:,} per group "
            "would be needed"
        )
    notes: tuple[str, ...] = ()
    if _by_cluster_means(family, design):
        assert design.cluster is not None
        m = design.cluster.size
        k, achieved = smallest_n(lambda k: family.cluster_power(tested, k, es), tested.power,
                                 start * design.design_effect / m, 2, MAX_N // m)
        n = k * m
        n_individual = _individual(design, n)
        sizes = (n, math.ceil(design.allocation_ratio * k - 1e-9) * m)
    else:
        if family.monotone:
            search = smallest_n_pointwise if family.power_per_n else smallest_n
            n_individual, achieved = search(lambda n: family.power(tested, n, es), tested.power, start, family.min_n)
        else:
            n_individual, achieved, notes = _settled_n(family, tested, es, start)
        n = _clustered(design, n_individual)
        if n > MAX_N:
            raise InfeasibleDesign(f"more than {MAX_N:,} per group would be needed once the design effect is "
                                   "applied")
        sizes = family.group_sizes(design, n)
    enrolled = tuple(enrolment(g, design.attrition) for g in sizes)
    clusters = None
    if design.cluster is not None:
        m = design.cluster.size
        clusters = tuple(math.ceil(g / m - 1e-9) for g in enrolled)
        enrolled = tuple(c * m for c in clusters)
    events = family.required_events(tested, es)
    if events is not None:
        events = math.ceil(events * design.design_effect - 1e-9)
    return SampleSize(
        test=family.name,
        n_per_group=n,
        n_total=sum(sizes),
        achieved_power=achieved,
        target_power=design.power,
        alpha=design.alpha,
        alternative=family.alternative_for(design),
        effect_size=es,
        symbol=family.symbol_for(design),
        group_sizes=sizes,
        enrolment_per_group=enrolled[0],
        enrolment_total=sum(enrolled),
        unit=family.unit,
        method=_method(family, design),
        reference=family.references(design),
        events=events,
        notes=notes + tuple(family.notes(tested)) + tuple(_shared_notes(design)),
        alpha_per_test=tested.alpha if design.multiplicity is not None else None,
        design_effect=design.design_effect if design.cluster is not None else None,
        individual_n_per_group=n_individual if design.cluster is not None else None,
        cluster_size=design.cluster.size if design.cluster is not None else None,
        clusters_per_group=clusters,
        label=family.label(tested) if family.exact_at(tested, n_individual) else "normal approximation",
        start_n=math.ceil(start - 1e-9) if family.formula(tested) is not None else None,
        start_method=family.formula(tested),
    )


def _settled_n(family: Family, design: DesignBase, es: float, start: float) -> tuple[int, float, tuple[str, ...]]:
    """Non-monotone power: the smallest n from which every larger n reaches the target.

    The scan bound is where the family's smooth approximation gives power
    ``1 - (1 - target) / 4`` (0.95 for a target of 0.80), at least twice the approximate n:
    the saw-tooth of exact power around the smooth curve shrinks as n grows, and at that bound
    the smooth curve is several saw-tooth amplitudes above the target.
    """
    high = design.model_copy(update={"power": 1 - (1 - design.power) / 4})
    bound = int(min(max(family.approximate_n(high, es), 2 * start, family.min_n + 64), _SCAN_LIMIT)) + 1
    power_of = lambda n: family.power(design, n, es)  # noqa: E731
    lo = max(family.min_n, math.floor(family.scan_floor * start))
    if (bound - lo) * family.enumeration_cost(design, bound) > _SCAN_CELLS:
        return _settled_in_window(family, design, power_of, start, lo)
    while lo > family.min_n and float(power_of(np.array([lo]))[0]) >= design.power:
        lo = max(family.min_n, lo // 2)  # the floor must lie where power is still below the target
    n, first, scanned = smallest_n_from_which(power_of, design.power, bound, lo)
    achieved = float(power_of(np.array([n]))[0])
    checked = f"{lo:,} to {scanned:,}" if lo > family.min_n else f"up to {scanned:,}"
    note = (f"exact power is not monotone in n: {n} is the smallest n from which every larger n "
            f"(checked {checked}) reaches the target power")
    if first is not None:
        note += (f"; n = {first} already reaches it (power {float(power_of(np.array([first]))[0]):.4f}) "
                 "but some n between fall below")
    return n, achieved, (note,)


def _settled_in_window(family: Family, design: DesignBase, power_of: Callable[[np.ndarray], np.ndarray],
                       start: float, lo: int) -> tuple[int, float, tuple[str, ...]]:
    """Non-monotone power at sizes where scanning every n would take minutes: bisection finds where
    power crosses the target, then a window of n around it is scanned for the saw-tooth (whose
    amplitude shrinks as n grows)."""
    crossing, _ = smallest_n(power_of, design.power, start, lo)
    cost = max(1.0, family.enumeration_cost(design, crossing))
    width = int(max(10, min(500, _SCAN_CELLS / (4 * cost))))
    low = max(family.min_n, crossing - width)
    candidates = np.arange(low, crossing + 3 * width + 1)
    powers = power_of(candidates)
    failures = candidates[powers < design.power]
    n = int(failures.max()) + 1 if failures.size else int(low)
    inside = n - low < len(powers)  # past the window only if its last n fell short
    achieved = float(powers[n - low] if inside else power_of(np.array([n]))[0])
    exact = family.exact_at(design, n)
    note = (f"exact power is not monotone in n: {n} is the smallest n from which every n checked ({low:,} to "
            f"{int(candidates[-1]):,}, around the crossing found by bisection) reaches the target power"
            if exact else
            _handed_over(family, design, n))
    return n, achieved, (note,)


def _handed_over(family: Family, design: DesignBase, n: int) -> str:
    """The note of a power that is the large-sample approximation because enumeration is too large."""
    return (f"at n = {n:,} enumerating every table would take too long, so the power is the large-sample "
            f"approximation: {family.formula(design)}; near 80% power it lies within about 0.003 of the exact "
            "enumeration where the hand-over happens, and closer beyond")


def _minimum_effect(family: Family, tested: DesignBase, n: int,
                    fn: Callable[[np.ndarray, float], np.ndarray] | None = None) -> float | None:
    es = family.effect_size(tested)
    sign = -1.0 if (tested.alternative == "less" or (tested.alternative == "two-sided" and es < 0)) else 1.0
    at = fn or (lambda n, es: family.power(tested, n, es))

    def gap(magnitude: float) -> float:
        return float(at(np.array([n]), sign * magnitude)[0]) - tested.power

    high = 1.0
    while gap(high) < 0:
        high *= 2
        if high > 1e6:
            return None
    low = 0.0
    return sign * brentq(gap, low, high, xtol=1e-10, rtol=1e-10)


def power_of(design: DesignBase, n: Any, effect_size: float | None = None) -> np.ndarray:
    """Power at each analysable n per group (vectorized), at the design's effect or at ``effect_size``.

    Applies the shared adjustments as :func:`power_at` does: the per-test alpha of a
    multiplicity block, and ``floor(n / design effect)`` independent units for clusters.

    >>> from registry.power import design_from_params
    >>> [round(float(p), 4) for p in power_of(design_from_params("two-sample-t", d=0.5), [64, 86], 0.5)]
    [0.8015, 0.9032]
    """
    family = design.family
    tested = design.as_tested()
    es = family.effect_size(tested) if effect_size is None else effect_size
    units = np.asarray(n, dtype=float)
    if _by_cluster_means(family, design):
        return _power_fn(family, tested)(units, es)
    if design.cluster is not None:
        units = np.floor(units / design.design_effect + 1e-9)
    return family.power(tested, units, es)


def minimum_effect(design: DesignBase, n: int) -> float | None:
    """Smallest standardized effect (in the design's direction) reaching the target power with
    ``n`` analysable units per group (before the design effect, as in :func:`power_at`)."""
    family = design.family
    tested = design.as_tested()
    if _by_cluster_means(family, design):
        return _minimum_effect(family, tested, n, _power_fn(family, tested))
    return _minimum_effect(family, tested, _individual(design, n))


def power_at(design: DesignBase, n: int) -> PowerAtN:
    """Power of the design at ``n`` analysable units per group, and its minimum detectable effect.

    With a cluster block, ``n`` units are worth ``floor(n / design effect)`` independent units;
    with a multiplicity block, power is per outcome at the per-test alpha.
    """
    family = design.family
    if family.events_only(design):
        raise InfeasibleDesign(
            f"power at n = {n} depends on how many units have the event: give event_probability, or "
            "median_control with accrual and follow_up", "design.effect")
    if n < family.min_n:
        raise InfeasibleDesign(f"n must be at least {family.min_n} for the {family.title}; got {n}", "n")
    n_individual = _individual(design, n)
    if n_individual < family.min_n:
        raise InfeasibleDesign(
            f"{n} units in clusters are worth {n_individual} independent units (design effect "
            f"{design.design_effect:.4g}); the {family.title} needs at least {family.min_n}", "n"
        )
    tested = design.as_tested()
    es = _checked_effect(family, tested)
    if _by_cluster_means(family, design):
        assert design.cluster is not None
        if n < 2 * design.cluster.size:
            raise InfeasibleDesign(
                f"{n} units make fewer than 2 whole clusters of {design.cluster.size}; the "
                f"{family.cluster_analysis(design)} needs at least 2 clusters per group", "n")
        fn = _power_fn(family, tested)
        mde = _minimum_effect(family, tested, n, fn)
        at_n = float(fn(np.array([n]), es)[0])
    else:
        mde = _minimum_effect(family, tested, n_individual)
        at_n = float(family.power(tested, np.array([n_individual]), es)[0])
    sizes = family.group_sizes(design, n)
    events = family.expected_events(tested, n, es)  # among the units actually analysed
    large = () if family.exact_at(tested, n_individual) else (_handed_over(family, tested, n_individual),)
    return PowerAtN(
        test=family.name,
        n_per_group=n,
        n_total=sum(sizes),
        power=at_n,
        alpha=design.alpha,
        alternative=family.alternative_for(design),
        target_power=design.power,
        effect_size=es,
        symbol=family.symbol_for(design),
        minimum_detectable_effect=mde,
        minimum_detectable_natural=family.natural_effect(tested, mde) if mde is not None else {},
        group_sizes=sizes,
        unit=family.unit,
        events=None if events is None else round(events),
        notes=large + tuple(family.notes(tested)) + tuple(_shared_notes(design)),
        alpha_per_test=tested.alpha if design.multiplicity is not None else None,
        design_effect=design.design_effect if design.cluster is not None else None,
        effective_n_per_group=n_individual if design.cluster is not None else None,
    )
