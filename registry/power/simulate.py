"""Monte Carlo power: run a family's simulator in seeded, vectorized chunks.

One run is fully determined by the design, ``n``, ``reps``, ``seed`` and ``distribution``. The
random numbers come from :class:`registry.power.streams.UnitStreams`: blocks of replicates with
streams of their own derived from ``seed``, each draw generated unit after unit, so the chunks a
run is split into (memory) never change the answer, and runs at different n share their random
numbers (common random numbers: the experiment at n + 1 is the one at n with one more unit per
group, for simulators that draw each group in a call of its own).

The estimate is the fraction of simulated experiments whose analysis rejects H0, with the
binomial standard error ``sqrt(p (1 - p) / reps)`` (Morris, T. P., White, I. R. & Crowther,
M. J. (2019). Using simulation studies to evaluate statistical methods. *Statistics in
Medicine* 38, 2074-2102, table 6).

Examples
--------
>>> from registry.power import design_from_params
>>> result = simulated_power(design_from_params("two-sample-t", d=0.8), 26, reps=2000, seed=1)
>>> result.reps, abs(result.power - 0.8075) < 3 * result.standard_error
(2000, True)
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from .assumptions import DEFAULT_REPS, DEFAULT_SEED, MAX_REPS
from .base import DesignBase
from .shapes import InvalidSimulation
from .streams import BLOCK, UnitStreams

__all__ = ["SimulatedPower", "simulated_power", "simulate_plan", "standard_error", "DEFAULT_SEED",
           "DEFAULT_REPS", "InvalidSimulation"]

_CHUNK_CELLS = 2_000_000  # simulated values per chunk: bounds memory whatever n and reps are


@dataclass(frozen=True, repr=False)
class SimulatedPower:
    """Estimated power with its Monte Carlo standard error."""

    test: str
    n_per_group: int
    power: float
    standard_error: float
    reps: int
    seed: int
    distribution: str

    def __repr__(self) -> str:
        return (f"SimulatedPower(test={self.test!r}, n_per_group={self.n_per_group}, power={self.power:.4f}, "
                f"standard_error={self.standard_error:.4f}, reps={self.reps})")

    def to_dict(self) -> dict[str, object]:
        return {"test": self.test, "n_per_group": self.n_per_group, "power": self.power,
                "standard_error": self.standard_error, "reps": self.reps, "seed": self.seed,
                "distribution": self.distribution}


def standard_error(power: float, reps: int) -> float:
    """Binomial standard error of a simulated rejection rate: ``sqrt(p (1 - p) / reps)``.

    >>> round(standard_error(0.8, 10_000), 6)
    0.004
    """
    return math.sqrt(power * (1 - power) / reps)


def chunk_reps(design: DesignBase, n: int) -> int:
    """Replicates per chunk so that one chunk holds about ``_CHUNK_CELLS`` simulated values."""
    per_rep = max(1, sum(design.family.group_sizes(design, n)))
    if design.cluster is not None:  # clustered designs are simulated one value per cluster
        per_rep = max(1, per_rep // design.cluster.size)
    return max(1, _CHUNK_CELLS // per_rep)


def simulated_power(
    design: DesignBase,
    n: int,
    *,
    reps: int = DEFAULT_REPS,
    seed: int = DEFAULT_SEED,
    distribution: str | None = None,
    progress: Callable[[int, int], None] | None = None,
    chunk: int | None = None,
) -> SimulatedPower:
    """Power of ``design`` at ``n`` analysable units per group by simulating ``reps`` experiments.

    ``distribution`` defaults to the family's choice for this design (its own outcome: normal,
    binary, or the distribution a rank-test design assumes). Each simulated test runs at the
    per-test alpha (``alpha / k`` with a multiplicity block). ``progress(done, total)`` is called
    after each chunk (for a progress bar on long runs); ``chunk`` overrides the replicates per
    chunk, rounded down to whole blocks of :data:`registry.power.streams.BLOCK` (memory only: the
    answer is the same).
    Raises :class:`InvalidSimulation` (a ``ValueError``) for a request the family cannot simulate.
    """
    family = design.family
    clusters = None
    if design.cluster is not None:
        if not family.cluster_means:
            raise InvalidSimulation(
                f"simulating clustered {family.name} designs is not offered: the simulator draws independent "
                "units. Simulate the design without its cluster block at n / design effect units per group")
        own = family.distributions[0]  # the outcome the cluster-level model describes
        if distribution not in (None, own):
            raise InvalidSimulation(f"clustered {family.name} designs are simulated with {own} outcomes; "
                                    f"got {distribution!r}")
        clusters = n // design.cluster.size
        if clusters < 2:
            raise InvalidSimulation(f"{n} units make fewer than 2 whole clusters of {design.cluster.size}; the "
                                    f"{family.cluster_analysis(design)} needs at least 2 clusters per group")
    if distribution is None:
        distribution = family.default_distribution(design)
    if distribution not in family.distributions:
        raise InvalidSimulation(f"the {family.name} simulator offers {', '.join(family.distributions)}; "
                                f"got {distribution!r}")
    if not 1 <= reps <= MAX_REPS:
        raise InvalidSimulation(f"reps must be between 1 and {MAX_REPS:,}; got {reps!r}")
    if n < family.min_n:
        raise InvalidSimulation(f"n must be at least {family.min_n} for the {family.title}; got {n}")
    design = design.as_tested()
    size = chunk if chunk is not None else chunk_reps(design, n)
    if size < 1:
        raise InvalidSimulation(f"chunk must be at least 1; got {size!r}")
    per_chunk = max(1, size // BLOCK)  # whole blocks, so the chunk size never changes the answer
    rejected = done = 0
    first = 0
    while done < reps:
        step = min(per_chunk * BLOCK, reps - done)
        rng = UnitStreams(seed, first, step)
        if clusters is None:
            decisions = family.simulate(design, n, step, rng, distribution)
        else:  # the cluster-level test (families with cluster_means)
            decisions = family.simulate_clusters(design, clusters, step, rng)
        rejected += int(np.count_nonzero(decisions))
        done += step
        first += per_chunk
        if progress is not None:
            progress(done, reps)
    p = rejected / reps
    return SimulatedPower(family.name, n, p, standard_error(p, reps), reps, seed, distribution)


def simulate_plan(design: DesignBase, n: int,
                  progress: Callable[[int, int], None] | None = None) -> SimulatedPower | None:
    """Run the spec's ``design.simulation`` block at ``n``, or return None when it has none."""
    plan = design.simulation
    if plan is None:
        return None
    return simulated_power(design, n, reps=plan.reps, seed=plan.seed, distribution=plan.distribution,
                           progress=progress)
