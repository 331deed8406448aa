"""Monte Carlo power: run a family's simulator in seeded, vectorized chunks."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from .base import DesignBase

__all__ = ["SimulatedPower", "simulated_power", "DEFAULT_SEED", "DEFAULT_REPS"]

DEFAULT_SEED = 20270301
DEFAULT_REPS = 10_000
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


def simulated_power(
    design: DesignBase,
    n: int,
    *,
    reps: int = DEFAULT_REPS,
    seed: int = DEFAULT_SEED,
    distribution: str | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> SimulatedPower:
    """Power of ``design`` at ``n`` by simulating ``reps`` experiments (seeded, reproducible).

    ``distribution`` defaults to the family's choice for this design (``normal``, or the
    distribution a rank-test design assumes). Each simulated test runs at the per-test alpha
    (``alpha / k`` with a multiplicity block). ``progress(done, total)`` is called after each
    chunk, for a progress bar on long runs.
    """
    family = design.family
    if design.cluster is not None:
        raise ValueError(
            "simulating clustered designs is not offered: the simulators draw independent units. "
            "Simulate the design without its cluster block at n / design effect units per group"
        )
    if distribution is None:
        distribution = family.default_distribution(design)
    if distribution not in family.distributions:
        raise ValueError(f"the {family.name} simulator offers {', '.join(family.distributions)}; "
                         f"got {distribution!r}")
    if reps < 1:
        raise ValueError(f"reps must be at least 1; got {reps}")
    rng = np.random.default_rng(seed)
    design = design.as_tested()
    per_rep = max(1, sum(family.group_sizes(design, n)))
    chunk = max(1, min(reps, _CHUNK_CELLS // per_rep))
    rejected = 0
    done = 0
    while done < reps:
        size = min(chunk, reps - done)
        rejected += int(np.count_nonzero(family.simulate(design, n, size, rng, distribution)))
        done += size
        if progress is not None:
            progress(done, reps)
    p = rejected / reps
    return SimulatedPower(family.name, n, p, math.sqrt(max(p * (1 - p), 1e-12) / reps), reps, seed, distribution)
