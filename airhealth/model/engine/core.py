"""The engine pieces the IRLS engine and the lag-grid path share: work buffers and the weighted Gram product.

Contract (internal; :mod:`airhealth.model.engine.irls` and :mod:`airhealth.model.engine.grid` /
:mod:`airhealth.model.engine.grid_inference` use only these names from here):

* :func:`workspace` ``(key, shape, order)`` - a reusable per-thread ``float64`` buffer; its contents are
  undefined on return and it is overwritten by the next request for the same ``key`` in the same thread,
  so a caller must not keep it beyond its own computation nor hand it to code that asks for the same key.
* :func:`layout` ``(X)`` - ``"F"`` for a column-major matrix, else ``"C"``: request work buffers in the
  layout of the matrix they mirror.
* :func:`weighted_gram` ``(X, w, buf)`` - the upper triangle (Fortran order; the strict lower triangle is
  zero) of ``X.T diag(w) X`` for non-negative weights ``w``, computed as one BLAS ``syrk`` on ``sqrt(w) X``
  written into ``buf`` (same shape as ``X``; on return ``buf`` holds ``sqrt(w) X``, which the caller may
  use, e.g. for a rank diagnosis). No checks: the caller has validated ``X`` and ``w``.

BLAS threading is not chosen here: the fitting functions run inside
:func:`airhealth._threads.fitting_threads`.

References
----------
Golub GH, Van Loan CF (2013). *Matrix Computations*, 4th ed. Johns Hopkins University Press, section 1.3
(level-3 BLAS; the symmetric rank-k update ``syrk``).
"""

from __future__ import annotations

import threading

import numpy as np
from scipy.linalg import blas

__all__ = ["layout", "weighted_gram", "workspace"]

_WORKSPACE = threading.local()


def workspace(key: str, shape: tuple[int, int], order: str = "C") -> np.ndarray:
    """A reusable per-thread ``float64`` buffer of ``shape`` in ``order`` (contents undefined).

    Fresh multi-megabyte arrays are served by the operating system page by page and the page faults
    cost more than a ``syrk`` on them, so the ``n x p`` work buffers are kept (one per key and thread;
    the largest size requested so far).
    """
    size = int(shape[0]) * int(shape[1])
    flat = getattr(_WORKSPACE, key, None)
    if flat is None or flat.size < size:
        flat = np.empty(size)
        setattr(_WORKSPACE, key, flat)
    return flat[:size].reshape(shape, order=order)


def layout(X: np.ndarray) -> str:
    """``"F"`` for a column-major matrix, else ``"C"`` (work buffers follow the design's layout)."""
    return "F" if X.flags.f_contiguous and not X.flags.c_contiguous else "C"


def weighted_gram(X: np.ndarray, w: np.ndarray, buf: np.ndarray) -> np.ndarray:
    """Upper triangle of ``X.T diag(w) X`` (Fortran order) by one ``syrk`` on ``buf`` (see the contract)."""
    np.multiply(X, np.sqrt(w)[:, None], out=buf)
    if layout(buf) == "F":  # column-major: syrk on the columns directly (about 20% faster here)
        return blas.dsyrk(1.0, buf, trans=1, lower=0)
    return blas.dsyrk(1.0, buf.T, trans=0, lower=0)
