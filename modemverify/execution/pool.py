"""Local parallel workers: the BER blocks of a point on N processes of this machine.

:class:`WorkerPool` keeps up to ``2 x workers`` blocks in flight, hands the results back in
block order (so the sequential test stops at the same bit as in one process) and, when the
consumer has decided, cancels the blocks not started and stops the workers that are still
computing blocks past the decision. Worker processes are started with ``forkserver`` where the
platform has it (``spawn`` elsewhere): a fresh interpreter that imports modemverify and opens
the device from the spec, never a copy of the run's own state (its signal handlers, its open
device, its threads). A worker that dies (a crash in a C library, the OOM killer) ends the point
with an error verdict naming it; the blocks done before it are kept in the campaign file.
"""

from __future__ import annotations

import multiprocessing
import os
from collections import deque
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool

from ..bench import Bench
from ..blocks import Engine, bench_state
from ..errors import AdapterError
from . import worker

__all__ = ["RunAhead", "WorkerPool", "available_cores", "spec_key"]


def available_cores() -> int:
    """The cores this process may run on (``auto`` workers)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not Linux
        return max(1, os.cpu_count() or 1)


def spec_key(spec) -> str:
    """The key a worker caches its bench under: one per device file and content."""
    return f"{spec.file or spec.name}:{spec.sha256 or id(spec)}"


def _context():
    methods = multiprocessing.get_all_start_methods()
    return multiprocessing.get_context("forkserver" if "forkserver" in methods else "spawn")


class RunAhead:
    """Jobs submitted up to ``window`` ahead of the one handed back, in job order.

    Iterating gives ``(job, handle)`` as ``submit(job)`` returned it; :attr:`pending` holds the
    submitted jobs not handed back yet (to cancel when the consumer stops).
    """

    def __init__(self, jobs, submit, window: int):
        self._jobs = iter(jobs)
        self._submit = submit
        self._window = max(1, int(window))
        self.pending: deque = deque()

    def __iter__(self):
        while True:
            while len(self.pending) < self._window:
                job = next(self._jobs, None)
                if job is None:
                    break
                self.pending.append((job, self._submit(job)))
            if not self.pending:
                return
            yield self.pending.popleft()


class WorkerPool(Engine):
    """``workers`` local processes computing blocks (see the module docstring)."""

    def __init__(self, bench: Bench, workers: int):
        self.workers = int(workers)
        self._spec = bench.spec
        self._state = bench_state(bench)
        self._key = spec_key(bench.spec)
        self._pool: ProcessPoolExecutor | None = None

    def _executor(self) -> ProcessPoolExecutor:
        if self._pool is None:
            self._pool = ProcessPoolExecutor(self.workers, mp_context=_context(),
                                             initializer=worker.ignore_interrupts)
        return self._pool

    def warm(self) -> None:
        pool = self._executor()
        for _ in range(self.workers):
            pool.submit(worker.warm, self._key, self._spec, self._state)

    def results(self, jobs):
        pool = self._executor()
        ahead = RunAhead(jobs, lambda job: pool.submit(worker.compute, self._key, self._spec,
                                                       self._state, job), 2 * self.workers)
        try:
            for job, future in ahead:
                try:
                    out = future.result()
                except BrokenProcessPool as exc:
                    self._pool = None
                    raise AdapterError(f"a worker process died while computing block "
                                       f"{job.index} of {job.point} ({exc}); the blocks "
                                       f"before it are kept") from None
                yield worker.unwrap(out, f"a worker (block {job.index} of {job.point})")
        except GeneratorExit:  # decided: drop the blocks ahead; those running are discarded
            for _, future in ahead.pending:
                future.cancel()
            raise
        except BaseException:  # an interrupt or a failure: stop the workers now
            for _, future in ahead.pending:
                future.cancel()
            self._stop()
            raise

    def _stop(self) -> None:
        pool, self._pool = self._pool, None
        if pool is None:
            return
        terminate = getattr(pool, "terminate_workers", None)  # Python 3.14
        if terminate is not None:
            terminate()
            return
        for process in list((getattr(pool, "_processes", None) or {}).values()):
            process.terminate()
        pool.shutdown(wait=True, cancel_futures=True)

    def close(self) -> None:
        if self._pool is not None:
            pool, self._pool = self._pool, None
            pool.shutdown(wait=True, cancel_futures=True)
