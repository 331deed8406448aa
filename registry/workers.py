"""Forked worker processes for work that is many independent pieces (the specs of a registry),
and a forked process for one piece of work done on the side.

``render --all`` builds its summaries and draws their figures here, and ``check`` checks the
spec files it has no cached result for. Each piece runs in a worker forked from this process,
so it sees everything this process has loaded and read; results come back pickled, in order.
``check`` reads the git history in a :class:`BackgroundCall` meanwhile.
"""

from __future__ import annotations

import gc
import os
from typing import Any, Callable, Iterator

__all__ = ["ForkedWorkers", "BackgroundCall"]


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


class BackgroundCall:
    """``function(*args)`` computed in a process forked from this one now, while this one goes on.

    For work that needs nothing this process is about to load: ``check`` starts reading the git
    history before it loads the statistics its workers need, and so the history is read on the
    core that loading leaves idle. :meth:`result` waits for the value, which comes back through a
    ``multiprocessing`` pipe (as :class:`ForkedWorkers`' results do), and gives ``None`` where the
    child has none to give: no ``fork`` here, the work raised there, or its value does not pickle.
    The caller then does the work itself, so a failed child costs time, never a result. The
    child's output goes nowhere, and Ctrl-C is this process's to handle: the child ignores it,
    and :meth:`close` stops it. While other threads run here there is no child either: one of
    them may hold a lock the child would wait for forever.
    """

    def __init__(self, function: Callable[..., Any], *args: Any) -> None:
        import sys

        self._pid: int | None = None
        self._value: Any = None
        threading = sys.modules.get("threading")  # not loaded: no other thread can be running
        if not hasattr(os, "fork") or (threading is not None and threading.active_count() > 1):
            return
        from multiprocessing import Pipe

        receiving, sending = Pipe(duplex=False)
        try:
            pid = os.fork()
        except OSError:  # no process to spare: the caller does the work
            receiving.close()
            sending.close()
            return
        if pid == 0:  # the child: compute, send, and leave without running this process's exit code
            try:
                receiving.close()
                _quiet_child()
                _send(sending, function, args)
            finally:
                os._exit(0)
        sending.close()
        self._pid, self._receiving = pid, receiving

    def result(self) -> Any:
        """The child's value (waiting for it), or ``None``; the same on every call."""
        if self._pid is None:
            return self._value
        try:
            done, value = self._receiving.recv()
        except Exception:  # noqa: BLE001 - the child died before it sent (EOFError), or cut short
            done, value = False, None
        finally:
            self.close()
        self._value = value if done else None
        return self._value

    def close(self) -> None:
        """Stop the child if it is still running (an interrupt while waiting for it), and reap it."""
        if self._pid is not None:
            import signal

            try:
                os.kill(self._pid, signal.SIGKILL)  # a child that has sent is leaving anyway
            except OSError:  # already gone
                pass
            try:
                os.waitpid(self._pid, 0)
            except OSError:
                pass
            self._pid = None
            self._receiving.close()


def _quiet_child() -> None:
    """In a background child: Ctrl-C is the parent's, and nothing it writes reaches the terminal."""
    from .fsutil import output_to_null

    _ignore_interrupts()
    output_to_null()


def _send(sending: Any, function: Callable[..., Any], args: tuple[Any, ...]) -> None:
    try:
        value = function(*args)
    except BaseException:  # noqa: BLE001 - any failure there: the parent does the work itself
        sending.send((False, None))
        return
    try:
        sending.send((True, value))  # pickled whole before anything is written
    except Exception:  # noqa: BLE001 - a value that does not pickle
        sending.send((False, None))
