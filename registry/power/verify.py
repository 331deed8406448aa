"""Simulation-verified sample sizes: the smallest n at which the simulated test reaches the target.

Where a family's size comes from an approximation (Schoenfeld's events formula for the log-rank
test, the asymptotic relative efficiency of rank tests, a t-test run on outcomes that are not
normal), the formula's n is only a starting point. :func:`verified_sample_size` simulates the
analysis the spec names (the family's ``simulate``: the real test on every simulated data set) at
candidate n and moves n until the simulated power at n reaches the target and at n - 1 does not.

* Every candidate n is simulated from the same seed with common random numbers
  (:mod:`registry.power.streams`): the simulated experiment at n + 1 is the one at n with one more
  unit per group, so the estimates at neighbouring n are strongly positively correlated, the
  simulated power curve rises (almost) steadily, and the search is reproducible bit for bit; each
  estimate is vectorized over its replicates (:func:`registry.power.simulate.simulated_power`).
* The search brackets the answer in geometric steps from the formula's n (2% of it at first),
  then bisects; with ``executor`` (any ``concurrent.futures.Executor``: a process pool, or a
  distributed engine's executor) a batch of candidates is simulated at once, one per worker,
  without it one candidate at a time, stopping as soon as the answer is bracketed.
* The answer holds "within Monte Carlo error": the estimates at n and n - 1 each have standard
  error ``sqrt(p (1 - p) / reps)`` (about 0.0028 at 20,000 replicates), reported with the result.
* Results are cached (:mod:`registry.power.cache`) by a hash of the design, the settings and
  the prespec version.

Example
-------
>>> from registry.power import design_from_params
>>> result = verified_sample_size(design_from_params("log-rank", hr=0.5, event_probability=0.8), reps=2000)
>>> result.label, result.start_n, result.n_per_group, result.achieved_power, result.verification["power_below"]
('simulation', 41, 42, 0.8095, 0.7985)
"""

from __future__ import annotations

import dataclasses
import math
from concurrent.futures import Executor
from pathlib import Path
from typing import Any, Callable

from .assumptions import DEFAULT_SEED
from .base import DesignBase, InfeasibleDesign
from .cache import SizeCache, cache_key
from .results import PowerAtN, SampleSize
from .simulate import simulated_power
from .solve import enrolment, power_at, solve_sample_size

__all__ = ["verified_sample_size", "verified_power_at", "needs_verification", "formula_method", "VERIFY_REPS",
           "SIMULATION_BUDGET", "Progress"]

#: Replicates per candidate n unless the spec's simulation block says otherwise.
VERIFY_REPS = 20_000
#: Units drawn per candidate n (replicates x analysable units) above which the search is not run: at
#: such sizes the large-sample formula's error is small and a simulation would hold a check for minutes.
SIMULATION_BUDGET = 20_000_000

#: ``progress(replicates simulated so far, None)``: the total is not known in advance.
Progress = Callable[[int, "int | None"], None]

_GROWTH_LIMIT = 50  # the search gives up beyond 50 times the formula's n

#: Part of every cache key: raise it whenever the search or a simulator changes its answers.
ALGORITHM = 4


def needs_verification(design: DesignBase) -> bool:
    """Whether this design's size should come from simulating its test.

    True for families whose size is an approximation (``Family.verify_by_simulation``), for
    designs whose ``design.simulation`` names an outcome other than the family's own model, and
    for clustered designs whose cluster-level power is an approximation (``Family.cluster_exact``
    False: the t-test on cluster means with unequal cluster sizes, the t-test on cluster
    proportions); False for other clustered designs (families without a cluster-level analysis
    simulate independent units: the design effect is labelled an approximation instead)."""
    family = design.family
    if design.cluster is not None:  # the cluster-level analyses whose power is approximate are simulated
        plan = design.simulation
        own = plan is None or plan.distribution in (None, family.distributions[0])
        return family.cluster_means and not family.cluster_exact(design) and own
    if getattr(family, "verify_by_simulation", False):
        return True
    plan = design.simulation
    return plan is not None and plan.distribution is not None and plan.distribution != family.distributions[0]


def formula_method(design: DesignBase) -> str:
    """The formula a verified design's search starts from, in words (its label included)."""
    family, plan = design.family, design.simulation
    if design.cluster is not None:
        return family.cluster_formula(design)
    own = family.default_distribution(design.as_tested())
    if plan is not None and plan.distribution is not None and plan.distribution != own:
        return f"{family.method}, for {own} outcomes, not the spec's {plan.distribution} outcome"
    return family.method


def _settings(design: DesignBase, reps: int | None, seed: int | None) -> tuple[int, int, str | None]:
    plan = design.simulation
    reps = reps if reps is not None else (plan.reps if plan is not None else VERIFY_REPS)
    seed = seed if seed is not None else (plan.seed if plan is not None else DEFAULT_SEED)
    distribution = plan.distribution if plan is not None else None
    return reps, seed, distribution


def _task(args: tuple[str, dict[str, Any], int, int, int, str | None]) -> float:
    """One candidate n (runs in a worker process too: the design travels as JSON).

    For a clustered design the candidate is whole clusters in group 1, ``n`` their units."""
    test, data, n, reps, seed, distribution = args
    from .catalog import get_family

    design = type(get_family(test)).design_model.model_validate(data)
    return simulated_power(design, n, reps=reps, seed=seed, distribution=distribution).power


class _Search:
    def __init__(self, design: DesignBase, reps: int, seed: int, distribution: str | None,
                 executor: Executor | None, progress: Progress | None) -> None:
        self.design = design
        self.data = design.model_dump(mode="json")
        self.reps, self.seed, self.distribution = reps, seed, distribution
        self.executor, self.progress = executor, progress
        #: units per step of the search: one unit, or one whole cluster of ``cluster.size`` units
        self.unit = design.cluster.size if design.cluster is not None else 1
        self.known: dict[int, float] = {}
        self.simulated = 0
        workers = getattr(executor, "_max_workers", None) if executor is not None else 1
        self.batch = max(2, int(workers or 2)) if executor is not None else 2

    def power(self, ns: list[int]) -> list[float]:
        todo = sorted({n for n in ns if n not in self.known})
        if todo:
            tasks = [(self.design.test, self.data, n * self.unit, self.reps, self.seed, self.distribution)
                     for n in todo]
            if self.executor is None:
                results = []
                for task in tasks:
                    results.append(_task(task))
                    self._advance()
            else:
                results = list(self.executor.map(_task, tasks))
                for _ in tasks:
                    self._advance()
            self.known.update(zip(todo, results))
        return [self.known[n] for n in ns]

    def _advance(self) -> None:
        self.simulated += self.reps
        if self.progress is not None:
            self.progress(self.simulated, None)

    def _first_switch(self, points: list[int], target: float) -> tuple[int, int] | None:
        """The first adjacent pair (a, b) of ``points`` (sorted) with power(a) < target <= power(b).

        Without an executor the points are simulated one at a time from the left, stopping at the
        first such pair; with one, all at once."""
        if self.executor is not None:
            self.power(points)
        previous = None
        for point in points:
            p = self.power([point])[0]
            if previous is not None and previous[1] < target <= p:
                return previous[0], point
            previous = (point, p)
        return None

    def run(self, start: int, lo_limit: int) -> int:
        target = self.design.power
        start = max(start, lo_limit)
        step = max(1, round(start * 0.02))
        if self.power([start])[0] >= target:  # bracket downwards
            high = start
            while True:
                if high <= lo_limit:
                    return lo_limit
                points = sorted({max(lo_limit, high - step * i) for i in range(1, self.batch + 1)} | {high})
                pair = self._first_switch(points, target)
                if pair is not None:
                    low, high = pair
                    break
                high, step = points[0], step * 2
        else:  # bracket upwards
            low = start
            while True:
                points = [low + step * i for i in range(0, self.batch + 1)]
                if points[-1] > _GROWTH_LIMIT * start:
                    raise InfeasibleDesign(
                        f"no n up to {_GROWTH_LIMIT} times the formula's {start:,} reaches the target power in "
                        "simulation; check the assumptions", "design")
                pair = self._first_switch(points, target)
                if pair is not None:
                    low, high = pair
                    break
                low, step = points[-1], step * 2
        while high - low > 1:  # bisect, a batch of interior points at a time
            count = min(self.batch, high - low - 1)
            inner = sorted({low + (high - low) * (i + 1) // (count + 1) for i in range(count)} - {low, high})
            pair = self._first_switch([low, *inner, high], target)
            assert pair is not None  # power(low) < target <= power(high)
            low, high = pair
        return high


def verified_sample_size(
    design: DesignBase,
    *,
    reps: int | None = None,
    seed: int | None = None,
    executor: Executor | None = None,
    progress: Progress | None = None,
    cache_dir: Path | None = None,
) -> SampleSize:
    """The smallest analysable n whose simulated power reaches the target, n - 1's does not.

    ``reps`` and ``seed`` default to the spec's ``design.simulation`` block, else
    :data:`VERIFY_REPS` and the default seed. The formula's answer is kept as the starting point
    (``start_n``, ``start_method``); ``label`` is ``simulation`` and ``verification`` holds the
    replicates, seed, distribution, the simulated power at n and n - 1 and its standard error.
    """
    formula = solve_sample_size(design)
    reps, seed, distribution = _settings(design, reps, seed)
    family = design.family
    if reps * _drawn(design, formula.n_per_group) > SIMULATION_BUDGET:
        return dataclasses.replace(formula, notes=(
            _over_budget("not verified by simulation", "size", design, formula.n_per_group, reps)
            + " (prespec size --simulate checks one n)", *formula.notes))
    cache = SizeCache(cache_dir)
    key = cache_key("verified-size", {"design": design.model_dump(mode="json"), "reps": reps, "seed": seed,
                                      "distribution": distribution, "algorithm": ALGORITHM})
    found = cache.get(key)
    unit = design.cluster.size if design.cluster is not None else 1
    lowest = 2 if design.cluster is not None else family.min_n  # whole clusters: at least 2 per group
    if found is None:
        search = _Search(design, reps, seed, distribution, executor, progress)
        step = search.run(formula.n_per_group // unit, lowest)
        below = search.power([step - 1])[0] if step - 1 >= lowest else None
        found = {"n": step * unit, "power": search.power([step])[0], "below": below,
                 "evaluations": len(search.known)}
        cache.put(key, found)
    n, achieved = int(found["n"]), float(found["power"])
    se = math.sqrt(achieved * (1 - achieved) / reps)
    clusters = None
    if design.cluster is not None:  # whole clusters, as the formula's search counts them
        sizes = tuple(k * unit for k in family.cluster_groups(design, n // unit))
        enrolled = tuple(enrolment(g, design.attrition) for g in sizes)
        clusters = tuple(math.ceil(g / unit - 1e-9) for g in enrolled)
        enrolled = tuple(c * unit for c in clusters)
    else:
        sizes = family.group_sizes(design, n)
        enrolled = tuple(enrolment(g, design.attrition) for g in sizes)
    sim_distribution = distribution or family.default_distribution(design.as_tested())
    below = found.get("below")
    previous = n - unit
    note = (f"simulated power of the {family.analysis_title(design)} at n = {n}: {achieved:.4f} (standard error "
            f"{se:.4f}, {reps:,} simulated experiments per n, {sim_distribution} outcome, seed {seed})"
            + (f"; at n = {previous}" + (f" ({previous // unit} clusters)" if unit > 1 else "") + f": {below:.4f}"
               if below is not None else "")
            + f"; the formula gave {formula.n_per_group} ({formula_method(design)})")
    events = family.expected_events(design.as_tested(), n)
    return dataclasses.replace(
        formula,
        n_per_group=n,
        n_total=sum(sizes),
        achieved_power=achieved,
        group_sizes=sizes,
        enrolment_per_group=enrolled[0],
        enrolment_total=sum(enrolled),
        clusters_per_group=clusters if clusters is not None else formula.clusters_per_group,
        individual_n_per_group=(math.floor(n / design.design_effect + 1e-9) if clusters is not None
                                else formula.individual_n_per_group),
        events=math.ceil(events - 1e-9) if events is not None else formula.events,
        notes=(note, *formula.notes),
        method=(f"simulation: the smallest n at which the simulated {family.title} reaches the target power "
                "and n - 1 does not, every n from the same seed with common random numbers"
                if design.cluster is None else
                f"simulation: the fewest whole clusters per group at which the simulated "
                f"{family.cluster_analysis(design)} reaches the target power and one cluster fewer does not "
                f"({family.cluster_model(design)}), every number of clusters from the same seed"),
        label="simulation",
        start_n=formula.n_per_group,
        start_method=formula_method(design),
        verification={"reps": reps, "seed": seed, "distribution": sim_distribution, "standard_error": se,
                      "power_below": below, "evaluations": int(found["evaluations"])},
    )


def _drawn(design: DesignBase, n: int) -> int:
    """Values one simulated experiment at ``n`` analysable units in group 1 draws: its units, or for a
    clustered design its clusters (the cluster-level simulators draw one summary per cluster)."""
    family = design.family
    if design.cluster is not None and family.cluster_means:
        return sum(family.cluster_groups(design, n // design.cluster.size))
    return sum(family.group_sizes(design, n))


def _over_budget(what: str, answer: str, design: DesignBase, n: int, reps: int) -> str:
    """The note of a result left to the formula because simulating it exceeds :data:`SIMULATION_BUDGET`."""
    family = design.family
    drawn = _drawn(design, n)
    clustered = design.cluster is not None and family.cluster_means
    units = "clusters" if clustered else "units"
    method = family.cluster_method(design) if clustered else family.method
    return (f"{what}: {reps:,} simulated experiments of {drawn:,} {units} exceed prespec's budget of "
            f"{SIMULATION_BUDGET:,} simulated {units}; the {answer} is the formula's ({method}), whose "
            "large-sample error is small at this n")


def verified_power_at(
    design: DesignBase,
    n: int,
    *,
    reps: int | None = None,
    seed: int | None = None,
    progress: Callable[[int, int], None] | None = None,
    cache_dir: Path | None = None,
) -> PowerAtN:
    """Power at ``n`` analysable units per group by simulating the test, as the size search does.

    The settings are those of :func:`verified_sample_size` (the spec's ``design.simulation``, else
    :data:`VERIFY_REPS` and the default seed), so the power at the verified n is the search's own
    estimate. ``power`` is the simulated power, ``formula_power`` the formula's; ``verification``
    holds the replicates, seed, outcome and Monte Carlo standard error. The minimum detectable
    effect is the formula's. Cached like the sizes.

    >>> from registry.power import design_from_params
    >>> at = verified_power_at(design_from_params("log-rank", hr=0.5, event_probability=0.8), 42, reps=2000)
    >>> at.power, round(at.formula_power, 4), at.verification["reps"]
    (0.8095, 0.8109, 2000)
    """
    formula = power_at(design, n)
    reps, seed, distribution = _settings(design, reps, seed)
    family = design.family
    if reps * _drawn(design, n) > SIMULATION_BUDGET:  # as for the size search: the formula, said so
        return dataclasses.replace(formula, notes=(
            _over_budget("not simulated", "power", design, n, reps), *formula.notes))
    sim_distribution = distribution or family.default_distribution(design.as_tested())
    cache = SizeCache(cache_dir)
    key = cache_key("simulated-power", {"design": design.model_dump(mode="json"), "n": n, "reps": reps,
                                        "seed": seed, "distribution": distribution, "algorithm": ALGORITHM})
    found = cache.get(key)
    if found is None:
        found = {"power": simulated_power(design, n, reps=reps, seed=seed, distribution=distribution,
                                          progress=progress).power}
        cache.put(key, found)
    achieved = float(found["power"])
    se = math.sqrt(achieved * (1 - achieved) / reps)
    return dataclasses.replace(
        formula, power=achieved, formula_power=formula.power,
        verification={"reps": reps, "seed": seed, "distribution": sim_distribution, "standard_error": se})
