"""BLAS threading: the fitting path's own thread policy, and one BLAS thread per parallel worker.

The fits here are dominated by ``n x p^2`` products (``X.T W X`` by ``syrk``) and ``n x p`` matrix-vector
passes of moderate size. Measured on the 2-core development machine (``benchmarks/bench_threads.py``,
figures in ``benchmarks/README.md``), a second OpenBLAS thread made such fits slower, not faster, up to
designs far larger than daily time series produce, often several times slower with the other core busy:
OpenBLAS threads spin while waiting for each other. So the fitting path picks its threading itself:

* :func:`fitting_threads` - the context manager every fit runs inside (``engine.fit_glm``, the grid paths,
  ``compare``, ``sweep``): one BLAS thread while the fit runs for designs up to :data:`ONE_THREAD_MAX_WORK`
  (``n * p^2``), the library's own setting above; the caller's setting is restored afterwards;
* :func:`single_threaded_blas` - one BLAS thread for any block of code in the current process;
* :func:`worker_initializer` - pass as ``initializer=`` to :class:`concurrent.futures.ProcessPoolExecutor`
  or :class:`multiprocessing.pool.Pool`, or run it on every dask worker (``client.run(worker_initializer)``).

Cost: threadpoolctl enumerates the loaded libraries (about 1-10 ms) when its controller is built, so
:func:`fitting_threads` builds one controller for the BLAS libraries on first use and keeps it; entering
and leaving then reads and sets each library's thread count directly (a few microseconds). Libraries loaded
after the first fit (none that airhealth uses: numpy's and scipy's BLAS are loaded by then) are not limited.
Nested and concurrent fits (threads) share one limit: the first to enter saves the caller's setting, the last
to leave restores it. BLAS thread counts are process-wide, so other code running in another Python thread
while a fit runs also gets the fit's count.
"""

from __future__ import annotations

import functools
import os
import threading
from collections.abc import Callable, Iterator
from contextlib import AbstractContextManager, contextmanager
from typing import Any, TypeVar

import numpy as np
from threadpoolctl import ThreadpoolController, threadpool_info, threadpool_limits

__all__ = [
    "ONE_THREAD_MAX_WORK",
    "blas_threads",
    "design_threads",
    "fitting_blas_threads",
    "fitting_threads",
    "policy_threads",
    "single_threaded_blas",
    "worker_initializer",
]

#: Largest design, as ``n_rows * n_columns**2`` (the multiply-adds of one ``X.T W X``), fitted with one BLAS
#: thread; larger designs keep the BLAS library's own thread count. Measured (benchmarks/README.md): one
#: thread was as fast or faster in 34 of 36 measurements up to the largest size, 50,000 x 500 = 1.25e10 (a
#: 14-year daily series is ~5,000 x 120 = 7e7); larger designs were not measured, so they keep the
#: library's setting.
ONE_THREAD_MAX_WORK = 1.25e10
#: Switch for benchmarks that time the engine at thread counts they set themselves.
POLICY_ENABLED = True

_THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "BLIS_NUM_THREADS")
_worker_limits = None  # keeps the worker's limiter alive for the life of the process
_lock = threading.Lock()
_blas = None  # the BLAS library controllers, found once
_depth = 0  # fits currently inside fitting_threads (all threads)
_saved: list[int] = []  # the caller's thread counts, restored when the last fit leaves


def fitting_blas_threads(n_rows: int, n_columns: int) -> int | None:
    """The BLAS thread count the fitting path uses for an ``n_rows x n_columns`` design.

    Returns 1 up to :data:`ONE_THREAD_MAX_WORK` multiply-adds per information matrix, ``None`` (keep the
    library's own setting) above it.
    """
    return 1 if float(n_rows) * float(n_columns) ** 2 <= ONE_THREAD_MAX_WORK else None


def _blas_libraries() -> list:
    global _blas
    if _blas is None:
        import scipy.linalg  # noqa: F401  - numpy's and scipy's BLAS must be loaded before the controller is built

        _blas = ThreadpoolController().select(user_api="blas").lib_controllers
    return _blas


@contextmanager
def fitting_threads(n_rows: int, n_columns: int) -> Iterator[None]:
    """Run a fit of an ``n_rows x n_columns`` design with the policy's BLAS thread count, then restore.

    Examples
    --------
    >>> with fitting_threads(5000, 120):
    ...     pass  # the engine's products run with one BLAS thread here
    """
    target = fitting_blas_threads(n_rows, n_columns) if POLICY_ENABLED else None
    if target is None:
        yield
        return
    _enter(target)
    try:
        yield
    finally:
        _leave()


F = TypeVar("F", bound=Callable[..., Any])


def policy_threads(func: F) -> F:
    """Decorator for a fitting function whose first argument is the design: run it in :func:`fitting_threads`."""

    @functools.wraps(func)
    def fit_with_policy(X, *args, **kwargs):
        shape = getattr(X, "shape", None)
        if shape is None:
            shape = np.shape(X)
        n, p = (*tuple(shape), 1, 1)[:2]  # a non-matrix is reported by func's own checks
        with fitting_threads(n, p):
            return func(X, *args, **kwargs)

    return fit_with_policy  # type: ignore[return-value]


def design_threads(n_rows: int) -> AbstractContextManager[None]:
    """The policy's BLAS threads while a design over ``n_rows`` days is built (spline bases, lag columns).

    Those products have a few dozen columns at most, so they follow the policy as a one-column fit would
    (one thread for any daily series); measured: a natural spline basis for 5,000 days took ~24 ms with
    the library's two threads on a busy machine and ~2 ms with one.
    """
    return fitting_threads(n_rows, 1)


def _enter(target: int) -> None:
    global _depth, _saved
    with _lock:
        if _depth == 0:
            libraries = _blas_libraries()
            _saved = [lib.get_num_threads() for lib in libraries]
            for lib, current in zip(libraries, _saved, strict=True):
                if current is not None and current > target:
                    lib.set_num_threads(target)
        _depth += 1


def _leave() -> None:
    global _depth
    with _lock:
        _depth -= 1
        if _depth == 0:
            for lib, original in zip(_blas_libraries(), _saved, strict=True):
                if original is not None and lib.get_num_threads() != original:
                    lib.set_num_threads(original)


@contextmanager
def single_threaded_blas() -> Iterator[None]:
    """Limit every loaded BLAS library to one thread inside the ``with`` block, then restore.

    Examples
    --------
    >>> with single_threaded_blas():
    ...     pass  # fit models here
    """
    with threadpool_limits(limits=1, user_api="blas"):
        yield


def worker_initializer() -> None:
    """Make the current (worker) process use one BLAS/OpenMP thread for the rest of its life.

    Sets the usual thread-count environment variables (for libraries loaded later, and for processes
    the worker starts) unless already set, and limits the libraries already loaded via threadpoolctl.
    """
    global _worker_limits
    for name in _THREAD_VARIABLES:
        os.environ.setdefault(name, "1")
    import numpy  # noqa: F401  - make sure numpy's BLAS is loaded so the limit applies to it

    _worker_limits = threadpool_limits(limits=1)


def blas_threads() -> list[int]:
    """Thread counts of the BLAS libraries loaded in this process (as reported by threadpoolctl)."""
    return [d["num_threads"] for d in threadpool_info() if d.get("user_api") == "blas"]
