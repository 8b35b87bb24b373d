"""Running one job per city on a ``concurrent.futures.Executor``, with retries of crashed workers.

The first stage hands each city to an executor: the local process pool it owns by default, the caller's
executor (any ``concurrent.futures.Executor``, e.g. dask's ``client.get_executor()``), or ``"serial"`` (in
this process, one city after the other). Only a few cities are in flight at a time (twice the workers),
so the cities' data are not all queued at once and memory stays flat as the number of cities grows.

Crashes. The job itself never raises: a city whose data the model refuses comes back as a row with its
message. So an exception from a future means the *worker* failed — a process that died (``os._exit``, a
segfault, out of memory: ``BrokenProcessPool``), a dask ``KilledWorker``, a lost connection. Such a city is
retried ``retries`` times, then reported in its ``error``. A dying process breaks a whole local pool and
with it every city in flight, so the crash cannot be attributed: the pool (when it is ours) is replaced and
those cities are rerun one at a time, where a crash is charged to the city that caused it.
"""

from __future__ import annotations

import os
from collections import deque
from collections.abc import Callable, Sequence
from concurrent.futures import FIRST_COMPLETED, CancelledError, Executor, Future, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from typing import Any

from .._threads import worker_initializer
from ..errors import SpecificationError
from .inputs import CityTask

__all__ = ["connect_dask", "default_workers", "run_tasks"]

#: Cities in flight per worker: enough to keep every worker busy, few enough to keep memory flat.
IN_FLIGHT_PER_WORKER = 2


def default_workers(n_cities: int, workers: int | None = None) -> int:
    """Workers of the local pool: ``workers`` if given, else the machine's cores, never more than the cities."""
    if workers is not None:
        if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
            raise SpecificationError(f"workers must be a positive whole number, got {workers!r}.")
        return min(workers, max(n_cities, 1))
    return max(1, min(os.cpu_count() or 1, n_cities))


def local_pool(workers: int) -> ProcessPoolExecutor:
    """A process pool whose workers each use one BLAS thread (``airhealth._threads.worker_initializer``)."""
    return ProcessPoolExecutor(max_workers=workers, initializer=worker_initializer)


def crash_message(exc: BaseException, attempts: int) -> str:
    """The ``error`` text of a city whose worker failed on every attempt."""
    return (
        f"the worker fitting this city stopped ({type(exc).__name__}: {exc}) on {attempts} attempt"
        f"{'s' if attempts != 1 else ''}; the city was not fitted. Its data may crash the fit: fit it alone "
        "with airhealth.fit to see why, or check the worker's memory."
    )


def _exception(future: Future) -> BaseException | None:
    """The future's exception (a cancelled future's is a ``CancelledError``, returned, not raised)."""
    if future.cancelled():
        return CancelledError(f"the executor cancelled the job ({future!r})")
    return future.exception()


class _Runner:
    """The loop over cities: a window of futures, retries, pool replacement and one-at-a-time reruns."""

    def __init__(
        self,
        work: Callable[[CityTask], dict[str, Any]],
        executor: Executor,
        make_pool: Callable[[], Executor] | None,
        retries: int,
        window: int,
        on_done: Callable[[CityTask, dict[str, Any] | None, str | None], None],
    ) -> None:
        self.work, self.executor, self.make_pool = work, executor, make_pool
        self.retries, self.window, self.on_done = retries, window, on_done
        self.attempts: dict[int, int] = {}
        self.pending: dict[Future, CityTask] = {}
        self.queue: deque[CityTask] = deque()
        self.alone: deque[CityTask] = deque()  # cities to rerun one at a time after an unattributed crash

    def _submit(self, task: CityTask) -> bool:
        try:
            self.pending[self.executor.submit(self.work, task)] = task
            return True
        except Exception as exc:  # a pool that broke before we noticed, or a closed executor
            if self.make_pool is None:
                self.on_done(task, None, f"the executor could not take the city ({type(exc).__name__}: {exc}).")
                return True
            self._replace_pool()
            self.pending[self.executor.submit(self.work, task)] = task
            return True

    def _replace_pool(self) -> None:
        self.executor.shutdown(wait=False)  # a broken pool: its futures have all failed already
        self.executor = self.make_pool()

    def _fill(self) -> None:
        if self.alone:
            if not self.pending:
                self._submit(self.alone.popleft())
            return
        while self.queue and len(self.pending) < self.window:
            self._submit(self.queue.popleft())

    def _failed(self, task: CityTask, exc: BaseException, shared: bool) -> None:
        if shared:  # the pool broke with several cities in flight: rerun each alone, uncharged
            self.alone.append(task)
            return
        self.attempts[task.index] = self.attempts.get(task.index, 0) + 1
        if self.attempts[task.index] <= self.retries:
            (self.alone if self.make_pool is not None else self.queue).appendleft(task)
        else:
            self.on_done(task, None, crash_message(exc, self.attempts[task.index]))

    def _collect(self, done: set[Future]) -> None:
        broken = any(isinstance(_exception(f), BrokenProcessPool) for f in done)
        if broken and self.make_pool is not None:
            wait(self.pending)  # every city in flight fails with the pool
            done = set(self.pending)
        shared = broken and self.make_pool is not None and len(done) > 1
        for fut in [f for f in self.pending if f in done]:
            task = self.pending.pop(fut)
            exc = _exception(fut)
            if exc is None:
                self.on_done(task, fut.result(), None)
            else:
                self._failed(task, exc, shared)
        if broken and self.make_pool is not None:
            self._replace_pool()

    def run(self, tasks: Sequence[CityTask]) -> None:
        self.queue.extend(tasks)
        while self.queue or self.alone or self.pending:
            self._fill()
            if not self.pending:
                continue
            done, _ = wait(self.pending, return_when=FIRST_COMPLETED)
            self._collect(done)


def run_tasks(
    tasks: Sequence[CityTask],
    work: Callable[[CityTask], dict[str, Any]],
    executor: Executor | str | None,
    *,
    workers: int | None,
    retries: int,
    on_done: Callable[[CityTask, dict[str, Any] | None, str | None], None],
) -> None:
    """Run ``work`` on every city; call ``on_done(task, row, crash_text)`` as each finishes.

    ``executor``: ``None`` (a local process pool, owned and shut down here), ``"serial"`` (this process), or
    any ``concurrent.futures.Executor`` (used, not shut down).
    """
    if isinstance(retries, bool) or not isinstance(retries, int) or retries < 0:
        raise SpecificationError(f"retries must be a whole number >= 0, got {retries!r}.")
    if executor == "serial":
        for task in tasks:
            on_done(task, work(task), None)
        return
    if isinstance(executor, str):
        raise SpecificationError(
            f"executor={executor!r} is not known; give None (local processes), 'serial', or a "
            "concurrent.futures.Executor such as dask's client.get_executor()."
        )
    if executor is not None and not isinstance(executor, Executor):
        raise SpecificationError(
            f"executor must be a concurrent.futures.Executor (e.g. client.get_executor() for dask), "
            f"got {type(executor).__name__}."
        )
    if executor is None:
        n = default_workers(len(tasks), workers)
        runner = _Runner(work, local_pool(n), lambda: local_pool(n), retries, IN_FLIGHT_PER_WORKER * n, on_done)
        try:
            runner.run(tasks)
        finally:
            runner.executor.shutdown(wait=True, cancel_futures=True)
        return
    n = workers or executor_slots(executor)
    _Runner(work, executor, None, retries, max(IN_FLIGHT_PER_WORKER * n, 4), on_done).run(tasks)


def executor_slots(executor: Executor) -> int:
    """How many jobs ``executor`` runs at once: a dask client's total worker threads, a pool's workers, or
    this machine's cores."""
    client = getattr(executor, "_client", None)  # dask's ClientExecutor
    if client is not None and hasattr(client, "nthreads"):
        try:
            return max(1, sum(client.nthreads().values()))
        except Exception:  # a client that cannot answer: fall back on the cores
            pass
    workers = getattr(executor, "_max_workers", None)
    return workers if isinstance(workers, int) and workers > 0 else os.cpu_count() or 1


def connect_dask(address: str, timeout: float = 10.0) -> tuple[Any, Executor]:
    """Connect to the dask scheduler at ``address``; return the client and its ``concurrent.futures`` executor.

    Raises
    ------
    SpecificationError
        dask.distributed is not installed, or the scheduler cannot be reached (the address is named).
    """
    try:
        from distributed import Client
    except ImportError:
        raise SpecificationError("the dask executor needs dask.distributed: pip install 'airhealth[dask]'.") from None
    try:
        client = Client(address, timeout=timeout, set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise SpecificationError(
            f"the dask scheduler at {address!r} could not be reached within {timeout:g} s ({exc}); "
            "check the address (e.g. tcp://host:8786) and that the scheduler is running. Nothing was fitted."
        ) from None
    return client, client.get_executor()
