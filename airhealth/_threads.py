"""Keep BLAS single-threaded where airhealth runs models in parallel.

A model grid fitted by several worker processes, each with a multi-threaded BLAS, runs ``workers x
BLAS-threads`` busy threads on the machine's cores; two workers on two cores with two BLAS threads each
spend much of their time waiting for each other (OpenBLAS threads spin while waiting). The fits here are
dominated by ``n x p^2`` products of moderate size that gain little from a second BLAS thread, so parallel
code should give each worker a single BLAS thread:

* :func:`single_threaded_blas` - a context manager for a block of code in the current process;
* :func:`worker_initializer` - pass as ``initializer=`` to :class:`concurrent.futures.ProcessPoolExecutor`
  or :class:`multiprocessing.pool.Pool`, or run it on every dask worker (``client.run(worker_initializer)``).

Both use threadpoolctl, which adjusts the BLAS/OpenMP libraries already loaded in the process.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from contextlib import contextmanager

from threadpoolctl import threadpool_info, threadpool_limits

__all__ = ["blas_threads", "single_threaded_blas", "worker_initializer"]

_THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "BLIS_NUM_THREADS")
_worker_limits = None  # keeps the worker's limiter alive for the life of the process


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
