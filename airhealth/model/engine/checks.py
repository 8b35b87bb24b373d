"""Input checks and rank-deficiency diagnosis for the GLM engine (:mod:`airhealth.model.engine.irls`).

Every check raises :class:`~airhealth.errors.FitError` or :class:`~airhealth.errors.SpecificationError`
with a message naming the argument, row or column and saying what to do.

References
----------
Golub GH, Van Loan CF (2013). *Matrix Computations*, 4th ed. Johns Hopkins, section 5.4 (QR with column
pivoting to find a numerically independent set of columns).
"""

from __future__ import annotations

from typing import Literal

import numpy as np
from scipy.linalg import qr, solve_triangular

from ..._choices import check_choice
from ...errors import FitError, SpecificationError

__all__ = [
    "RANK_TOL",
    "FamilyName",
    "ThetaMethod",
    "as_vector",
    "collinearity_error",
    "finite_or_raise",
    "validate_inputs",
    "validate_options",
]

FamilyName = Literal["poisson", "quasipoisson", "negbin"]
ThetaMethod = Literal["ml", "moments"]

#: A column whose weighted squared norm is explained by the preceding columns up to this fraction
#: (``1 - R^2`` below it) makes the design numerically rank-deficient.
RANK_TOL = 1e-11


def finite_or_raise(name: str, a: np.ndarray) -> None:
    if np.isfinite(a.sum()):  # a finite sum implies every element is finite (no temporary array)
        return
    ok = np.isfinite(a)
    if not ok.all():
        bad = ~ok if a.ndim == 1 else ~ok.all(axis=1)
        row = int(np.flatnonzero(bad)[0])
        where = f"row {row}" if a.ndim == 1 else f"row {row}, column {int(np.flatnonzero(~ok[row])[0])}"
        raise FitError(
            f"{name} has a non-finite value (NaN or infinite) at {where}; remove or impute such rows before fitting."
        )


def as_vector(name: str, a, n: int, default: float) -> np.ndarray:
    if a is None:
        return np.full(n, default)
    v = np.asarray(a, dtype=float)
    if v.shape != (n,):
        raise FitError(f"{name} has shape {v.shape} but the design has {n} rows; give one value per row.")
    finite_or_raise(name, v)
    return v


def validate_inputs(X, y, offset, weights, column_names):
    X = np.asarray(X, dtype=float)
    if not (X.flags.c_contiguous or X.flags.f_contiguous):
        X = np.ascontiguousarray(X)
    if X.ndim != 2:
        raise FitError(f"The design matrix must be two-dimensional; got {X.ndim} dimension(s).")
    n, p = X.shape
    y = np.asarray(y, dtype=float)
    if y.shape != (n,):
        raise FitError(f"y has shape {y.shape} but the design matrix has {n} rows; give one count per row.")
    finite_or_raise("X", X)
    finite_or_raise("y", y)
    if y.min(initial=0.0) < 0:
        raise FitError(f"y has a negative value at row {int(np.argmin(y))}; counts must be >= 0.")
    offset = as_vector("offset", offset, n, 0.0)
    weights = as_vector("weights", weights, n, 1.0)
    if weights.min(initial=0.0) < 0:
        raise FitError(f"weights has a negative value at row {int(np.argmin(weights))}; use weights >= 0.")
    used = int(np.count_nonzero(weights))
    if used <= p or weights.sum() <= p:
        raise FitError(
            f"The model has {p} coefficients but only {used} rows with positive weight (weight total "
            f"{weights.sum():g}); it needs more rows than coefficients. Use fewer terms or more days."
        )
    names = None
    if column_names is not None:
        names = tuple(str(c) for c in column_names)
        if len(names) != p:
            raise FitError(f"column_names has {len(names)} names but the design has {p} columns.")
    return X, y, offset, weights, names


def validate_options(family, theta, theta_method, tol, max_iter):
    check_choice("family", family, FamilyName)
    check_choice("theta_method", theta_method, ThetaMethod)
    if theta is not None:
        if family != "negbin":
            raise SpecificationError(f"theta is only used with family='negbin', not family={family!r}.")
        if not (np.isfinite(theta) and theta > 0):
            raise SpecificationError(f"theta={theta!r} must be a positive finite number.")
    if not (tol > 0):
        raise SpecificationError(f"tol={tol!r} must be positive.")
    if int(max_iter) < 1:
        raise SpecificationError(f"max_iter={max_iter!r} must be at least 1.")


def _column_label(j: int, names) -> str:
    return repr(names[j]) if names is not None else f"column {j}"


def collinearity_error(M: np.ndarray, names) -> FitError:
    """Name the collinear columns of ``M`` (the weighted design) using a pivoted QR."""
    norms = np.sqrt(np.einsum("ij,ij->j", M, M))
    zero = np.flatnonzero(norms <= 0)
    if zero.size:
        labels = ", ".join(_column_label(j, names) for j in zero)
        return FitError(
            f"The design matrix is rank-deficient: {labels} is zero on every row used (with positive "
            "weight); drop it and refit."
        )
    R, piv = qr(M / norms, mode="r", pivoting=True, check_finite=False)
    d = np.abs(np.diag(R))
    rank = max(1, int(np.sum(d > np.sqrt(RANK_TOL) * d[0])))
    rank = min(rank, M.shape[1] - 1)
    coefs = solve_triangular(R[:rank, :rank], R[:rank, rank:])
    parts = []
    for k, j in enumerate(piv[rank:][:3]):
        c = np.abs(coefs[:, k])
        involved = piv[:rank][c > 1e-6 * max(c.max(), 1e-300)]
        shown = ", ".join(_column_label(i, names) for i in involved[:8])
        more = f" and {involved.size - 8} more" if involved.size > 8 else ""
        parts.append(f"{_column_label(j, names)} is a linear combination of {shown}{more}")
    extra = M.shape[1] - rank - 3
    tail = f" ({extra} further redundant column(s))" if extra > 0 else ""
    return FitError(
        "The design matrix is rank-deficient (collinear columns): "
        + "; ".join(parts)
        + tail
        + ". Drop one of the columns named in each group and refit."
    )
