"""Common random numbers for Monte Carlo power: the first units of a replicate are the same at every n.

A simulation-verified size compares simulated power at neighbouring n. If every n drew fresh
random numbers, the estimates at n and n - 1 would be independent and the power curve would
wobble by about ``sqrt(2)`` Monte Carlo standard errors from one n to the next. With common
random numbers the experiment simulated at n + 1 is the experiment at n with one more unit per
group, so the estimates are strongly positively correlated and the curve rises (almost) steadily
(Glasserman, P. (2004). *Monte Carlo Methods in Financial Engineering*, section 4.2 (common random
numbers). New York: Springer).

:class:`UnitStreams` stands in for a :class:`numpy.random.Generator` in a family's simulator.
The replicates are cut into blocks of :data:`BLOCK`; the ``k``-th draw a simulator makes on a
block comes from its own stream, ``SeedSequence(seed, spawn_key=(0, block, k))``. A draw of shape
``(reps, units)`` is generated unit after unit (the replicate axis innermost, the other axes in
reversed order), so the first ``m`` units of every replicate come out the same whatever the
number of units drawn. The rule for simulators: draw each group, and each random component, in a
call of its own with the units on the last axis; then unit ``j`` of group ``g`` of replicate ``r``
is the same at every n. A draw whose first axis is not the replicates (a fixed design matrix)
comes from ``SeedSequence(seed, spawn_key=(1, k))``, the same for every block.

A run is fully determined by the seed, the number of replicates and the simulator; the chunks a
run is split into for memory are whole blocks, so the chunk size never changes the answer.

Examples
--------
>>> a = UnitStreams(7, 0, 3).normal(0.0, 1.0, size=(3, 4))
>>> b = UnitStreams(7, 0, 3).normal(0.0, 1.0, size=(3, 6))
>>> bool((a == b[:, :4]).all())
True
"""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["UnitStreams", "BLOCK", "blocks"]

#: Replicates per block: each block has its own streams.
BLOCK = 256

#: Position of ``size`` among the positional arguments of each Generator method a simulator may call.
_SIZE_AT = {
    "random": 0, "standard_normal": 0, "standard_exponential": 0,
    "normal": 2, "uniform": 2, "lognormal": 2, "laplace": 2, "logistic": 2, "gamma": 2, "beta": 2,
    "binomial": 2, "negative_binomial": 2, "multinomial": 2,
    "exponential": 1, "poisson": 1, "standard_t": 1, "chisquare": 1, "weibull": 1,
}
#: Methods whose parameters describe one draw (a probability vector), not one value per draw.
_WHOLE_PARAMETERS = {"multinomial"}


def blocks(reps: int) -> int:
    """Number of blocks ``reps`` replicates are cut into.

    >>> blocks(256), blocks(257), blocks(20_000)
    (1, 2, 79)
    """
    return -(-reps // BLOCK)


def _generator(seed: int, key: tuple[int, ...]) -> np.random.Generator:
    return np.random.Generator(np.random.PCG64(np.random.SeedSequence(seed, spawn_key=key)))


def _unit_major(parameter: Any, shape: tuple[int, ...], start: int, stop: int) -> Any:
    """A parameter for a block's draw in unit-major order: broadcast, cut to the block, axes reversed."""
    if not np.ndim(parameter):
        return parameter
    return np.broadcast_to(np.asarray(parameter), shape)[start:stop].T


class UnitStreams:
    """A Generator stand-in for replicates ``first * BLOCK`` to ``first * BLOCK + reps`` of a run.

    ``reps`` must end on a block boundary or at the run's last replicate."""

    def __init__(self, seed: int, first: int, reps: int) -> None:
        self._seed = seed
        self.reps = reps
        self._blocks = [(first + i, i * BLOCK, min(reps, (i + 1) * BLOCK)) for i in range(blocks(reps))]
        self._calls = 0

    def __getattr__(self, name: str) -> Any:
        if name not in _SIZE_AT:
            raise AttributeError(f"simulators draw with {', '.join(sorted(_SIZE_AT))}; {name!r} is not offered")
        return lambda *args, **kwargs: self._draw(name, args, kwargs)

    def _draw(self, name: str, args: tuple[Any, ...], kwargs: dict[str, Any]) -> np.ndarray:
        call = self._calls
        self._calls += 1
        args = list(args)
        at = _SIZE_AT[name]
        if "size" in kwargs:
            size = kwargs.pop("size")
        else:
            size = args.pop(at) if len(args) > at else None
        shape = (size,) if isinstance(size, (int, np.integer)) else (tuple(size) if size is not None else None)
        if not shape or shape[0] != self.reps:
            return getattr(_generator(self._seed, (1, call)), name)(*args, size=size, **kwargs)
        parts = []
        for block, start, stop in self._blocks:
            generator = _generator(self._seed, (0, block, call))
            local = (stop - start, *shape[1:])
            if name in _WHOLE_PARAMETERS:
                parts.append(getattr(generator, name)(*args, size=local, **kwargs))
                continue
            params = [_unit_major(p, shape, start, stop) for p in args]
            named = {k: v if k == "dtype" else _unit_major(v, shape, start, stop) for k, v in kwargs.items()}
            parts.append(getattr(generator, name)(*params, size=local[::-1], **named).T)
        return parts[0] if len(parts) == 1 else np.concatenate(parts, axis=0)
