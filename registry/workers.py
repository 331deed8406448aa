"""Forked worker processes for work that is many independent pieces (the specs of a registry).

``render --all`` builds its summaries and draws their figures here, and ``check`` checks the
spec files it has no cached result for. Each piece runs in a worker forked from this process,
so it sees everything this process has loaded and read; results come back pickled, in order.
"""

from __future__ import annotations

import gc
import os
from typing import Any, Callable, Iterator

__all__ = ["ForkedWorkers"]


class ForkedWorkers:
    """Forked worker processes, one per core, running ``work(i)`` for ``i`` in ``range(count)``.

    Forked workers inherit ``work`` and whatever it reads (the reports, the spec files), so only the
    numbers go out and the results come back, a few at a time; below ``from_count`` pieces there are
    no workers (starting them would cost more than they save). :meth:`results` yields the results
    in order; where forking is unavailable or the pool cannot start or breaks, the rest are computed
    here, one after the other, and so is a piece whose result a worker cannot give back (it does
    not pickle, or the work failed there: here it fails as it would with no workers). An interrupt
    stops the workers without waiting for the results not yet computed (:meth:`close`).
    """

    def __init__(self, work: Callable[[int], Any], count: int, *, from_count: int) -> None:
        import multiprocessing

        self._work, self._count, self._pool, self._frozen = work, count, None, False
        self._chunks: list[tuple[int, int, Any]] = []  # (first index, end, future)
        workers = min(os.cpu_count() or 1, count)
        if count < from_count or workers < 2 or "fork" not in multiprocessing.get_all_start_methods():
            return
        from concurrent.futures import ProcessPoolExecutor

        _WORK[:] = [work]  # read by the forked workers (see _run_work) until close()
        size = max(1, min(8, count // (8 * workers)))
        # The workers share this process's memory until they write to it; frozen, the inherited
        # objects are left out of the workers' garbage collections, which would otherwise write to
        # (and so copy) every page holding one. Here they stay frozen until close(): what the work
        # reads lives until then anyway, and full collections need not walk it again.
        gc.freeze()
        self._frozen = True
        try:
            self._pool = ProcessPoolExecutor(workers, mp_context=multiprocessing.get_context("fork"),
                                             initializer=_ignore_interrupts)
            # every chunk is submitted now: the workers start at once, while this process goes on
            for first in range(0, count, size):
                end = min(first + size, count)
                self._chunks.append((first, end, self._pool.submit(_run_work, first, end)))
        except (OSError, RuntimeError):  # e.g. no shared memory for the pool's queues: computed here instead
            self.close()
            self._chunks = []

    @property
    def pooled(self) -> bool:
        """Whether worker processes do the work (otherwise :meth:`results` computes it here)."""
        return bool(self._chunks)

    def results(self) -> Iterator[Any]:
        """Every result in order: the workers', and here what they could not give."""
        from concurrent.futures import CancelledError
        from concurrent.futures.process import BrokenProcessPool

        done = 0
        try:
            for first, end, future in self._chunks:
                try:
                    chunk = future.result()
                except (BrokenProcessPool, CancelledError, OSError):
                    break  # the rest are computed here
                except Exception:  # noqa: BLE001 - a result that does not pickle, or a failure there
                    chunk = [self._work(index) for index in range(first, end)]  # here: it fails as it would alone
                done = end
                yield from chunk
        finally:
            self.close()
        for index in range(done, self._count):
            yield self._work(index)

    def close(self) -> None:
        if self._pool is not None:
            self._pool.shutdown(wait=False, cancel_futures=True)
            _WORK.clear()
        if self._frozen:
            gc.unfreeze()
            self._frozen = False
        self._pool = None


def _ignore_interrupts() -> None:
    """In a worker: Ctrl-C is the main process's to handle (it stops the pool), never a worker's traceback."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)


#: The work of the pool running now (one at a time), read by its forked workers.
_WORK: list[Callable[[int], Any]] = []


def _run_work(first: int, end: int) -> list[Any]:
    work = _WORK[0]
    return [work(index) for index in range(first, end)]
