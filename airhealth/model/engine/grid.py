"""The lag grid's shared work: the confounder-only fit, and each structure's fixed Hessian.

A lag grid fits ``y ~ Z + E_k`` for many exposure blocks ``E_k`` (one to a few columns: a single lag, a
moving average, a distributed lag basis) over the same confounder block ``Z`` (intercept, time spline,
temperature splines, weekday; typically ~100 columns), each on the rows where its exposure is observed.
Fitting each model from scratch costs several ``n x p^2`` products. Here the confounder-only model is fitted
once (:func:`fit_confounders`), and for each structure :func:`prepare_exposure` builds the fixed
approximate Hessian ``H0 = X_r.T W0 X_r`` with the confounder fit's working weights ``W0`` on the usable
rows ``r``: its confounder block is the stored all-row ``Z.T W0 Z`` minus the contribution of the excluded
rows (a cheap downdate; formed directly when many rows are excluded); the blocks with the exposure columns
cost ``n p k``. ``H0`` is factorised once by Cholesky. :func:`airhealth.model.engine.grid_inference.fit_exposure_only`
iterates with it (method, stop and accuracy in docs/engine.md).

Contract used by :mod:`airhealth.model.engine.grid_inference`: :class:`ConfounderFit`, :func:`fit_confounders`,
:class:`ExposureProblem`, :func:`prepare_exposure` and :func:`plain_fit` (the reference path: ``fit_glm`` on
the stacked design, used whenever the shared work cannot be used).

The negative binomial family with estimated theta always uses the plain path.

References
----------
Golub GH, Van Loan CF (2013). *Matrix Computations*, 4th ed., section 6.5 (updating and downdating
Gram matrices).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.linalg import blas, lapack

from ..._threads import policy_threads
from ...errors import FitError
from .checks import RANK_TOL, finite_or_raise
from .core import weighted_gram, workspace
from .families import NegativeBinomial, Poisson
from .irls import FamilyName, GLMFit, ThetaMethod, fit_glm, intercept_column

__all__ = ["ConfounderFit", "ExposureProblem", "fit_confounders", "plain_fit", "prepare_exposure"]

#: Excluding more than this fraction of rows forms the restricted Gram matrix directly, not by downdate.
DOWNDATE_MAX_FRACTION = 0.3


@dataclass(frozen=True)
class ConfounderFit:
    """The confounder-only fit and what exposure fits reuse.

    Attributes
    ----------
    fit : GLMFit
        The confounder-only model fitted on all rows.
    Z, y, offset, weights
        The validated inputs (all rows).
    working_weights : array (n,)
        IRLS weights ``W0`` at the confounder-only fit (prior weights included).
    info : array (pc, pc)
        ``Z.T W0 Z`` over all rows.
    """

    fit: GLMFit
    Z: np.ndarray
    y: np.ndarray
    offset: np.ndarray
    weights: np.ndarray
    working_weights: np.ndarray
    info: np.ndarray
    family: str
    theta_method: str
    tol: float
    has_intercept: bool
    column_names: tuple[str, ...] | None

    @property
    def coef(self) -> np.ndarray:
        """Confounder-only coefficients."""
        return self.fit.coef

    @property
    def family_object(self) -> Poisson | NegativeBinomial:
        """The family with its fitted theta (negative binomial) or the Poisson mean model."""
        return NegativeBinomial(self.fit.theta) if self.fit.theta is not None else Poisson()


@policy_threads
def fit_confounders(
    Z,
    y,
    *,
    family: FamilyName = "quasipoisson",
    offset=None,
    weights=None,
    tol: float = 1e-10,
    max_iter: int = 100,
    theta: float | None = None,
    theta_method: ThetaMethod = "ml",
    column_names: Sequence[str] | None = None,
) -> ConfounderFit:
    """Fit the confounder-only model on all rows and keep what exposure fits reuse.

    Parameters are those of :func:`~airhealth.model.engine.irls.fit_glm`; ``Z`` is the confounder block.
    """
    fit = fit_glm(
        Z, y, family=family, offset=offset, weights=weights, theta=theta, theta_method=theta_method,
        tol=tol, max_iter=max_iter, column_names=column_names,
    )  # fmt: skip
    Zc = np.ascontiguousarray(Z, dtype=float)
    n = Zc.shape[0]
    off = np.zeros(n) if offset is None else np.asarray(offset, dtype=float)
    w = np.ones(n) if weights is None else np.asarray(weights, dtype=float)
    fam = NegativeBinomial(fit.theta) if fit.theta is not None else Poisson()  # None: fell back to Poisson
    w0 = fam.working_weights(fit.fitted, w)
    upper = weighted_gram(Zc, w0, workspace("design", Zc.shape))
    info = np.triu(upper) + np.triu(upper, 1).T
    return ConfounderFit(
        fit=fit, Z=Zc, y=np.asarray(y, dtype=float), offset=off, weights=w, working_weights=w0, info=info,
        family=family, theta_method=theta_method, tol=tol, has_intercept=intercept_column(Zc),
        column_names=fit.column_names,
    )  # fmt: skip


@dataclass(frozen=True)
class ExposureProblem:
    """One structure's checked inputs and fixed-Hessian factor (from :func:`prepare_exposure`).

    ``E`` is the exposure block as given, ``Ef`` the same with zeros on the rows outside ``rows``,
    ``prior_weights`` the base's weights times ``rows``, ``chol`` the upper Cholesky factor of ``H0`` or
    ``None`` when the plain path must be used (estimated theta, too few rows, not positive definite).
    """

    E: np.ndarray
    Ef: np.ndarray
    rows: np.ndarray
    names: tuple[str, ...] | None
    prior_weights: np.ndarray
    chol: np.ndarray | None
    tol: float


def _exposure_inputs(base: ConfounderFit, E, rows, column_names):
    n = base.Z.shape[0]
    E = np.asarray(E, dtype=float)
    if E.ndim == 1:
        E = E[:, None]
    if E.ndim != 2 or E.shape[0] != n:
        raise FitError(f"The exposure block has shape {E.shape} but the confounder block has {n} rows.")
    if rows is None:
        rows = np.ones(n, dtype=bool)
    rows = np.asarray(rows)
    if rows.dtype != bool or rows.shape != (n,):
        raise FitError(f"rows must be a boolean mask of length {n}; got dtype {rows.dtype}, shape {rows.shape}.")
    Ef = np.where(rows[:, None], E, 0.0)
    finite_or_raise("E (on the rows marked usable)", Ef)
    pc, k = base.Z.shape[1], E.shape[1]
    if column_names is not None:
        enames = tuple(str(c) for c in column_names)
        if len(enames) != k:
            raise FitError(f"column_names has {len(enames)} names but the exposure block has {k} columns.")
    else:
        enames = tuple(f"exposure_{j}" for j in range(k))
    znames = base.column_names or tuple(f"confounder_{j}" for j in range(pc))
    names = None if (base.column_names is None and column_names is None) else znames + enames
    return E, Ef, rows, names


def plain_fit(base: ConfounderFit, problem: ExposureProblem, max_iter: int) -> GLMFit:
    """The reference path: ``fit_glm`` on the stacked design restricted to the usable rows."""
    rows = problem.rows
    X = np.hstack([base.Z, problem.Ef])[rows]
    estimated = base.family == "negbin" and base.fit.theta_estimated
    theta = base.fit.theta if base.family == "negbin" and not estimated else None
    start = np.concatenate([base.coef, np.zeros(problem.E.shape[1])])
    return fit_glm(
        X, base.y[rows], family=base.family, offset=base.offset[rows], weights=base.weights[rows],
        start=start, theta=theta, theta_method=base.theta_method, tol=problem.tol, max_iter=max(max_iter, 100),
        column_names=problem.names,
    )  # fmt: skip


def _approximate_hessian(base: ConfounderFit, Ef: np.ndarray, rows: np.ndarray) -> np.ndarray | None:
    """Cholesky factor of ``X_r.T W0 X_r``, or None when it is not positive definite or a column is
    (numerically) a combination of the others, by the engine's test."""
    Z, w0 = base.Z, base.working_weights
    excluded = np.flatnonzero(~rows & (w0 > 0))
    if excluded.size <= DOWNDATE_MAX_FRACTION * Z.shape[0]:
        A = base.info.copy()
        if excluded.size:
            D = Z[excluded] * np.sqrt(w0[excluded])[:, None]
            A -= blas.dsyrk(1.0, D.T, trans=0, lower=0)  # upper triangle is what dpotrf reads
    else:
        A = weighted_gram(Z, w0 * rows, workspace("grid", Z.shape))
    WE = (w0 * rows)[:, None] * Ef
    pc, k = A.shape[0], Ef.shape[1]
    H = np.empty((pc + k, pc + k), order="F")
    H[:pc, :pc] = A
    H[:pc, pc:] = Z.T @ WE
    H[pc:, pc:] = Ef.T @ WE
    diagonal = H.diagonal().copy()
    diagonal[:pc] = base.info.diagonal()  # all rows: a downdated diagonal may be rounding noise
    c, status = lapack.dpotrf(H, lower=0, clean=1, overwrite_a=1)
    if status != 0:
        return None
    # the engine's rank test (1 - R^2 <= RANK_TOL), measured against each confounder column's information
    # over all rows: a column with no support on the usable rows (its downdated pivot is rounding noise)
    # leaves the structure to the full fit, which names or drops it
    with np.errstate(divide="ignore", invalid="ignore"):
        independent = c.diagonal() ** 2 > RANK_TOL * diagonal
    return c if np.all(independent) else None


def prepare_exposure(
    base: ConfounderFit, E, rows=None, column_names: Sequence[str] | None = None, tol: float | None = None
) -> ExposureProblem:
    """Check one structure's exposure block and row mask and factorise its fixed Hessian.

    Parameters
    ----------
    base : ConfounderFit
        From :func:`fit_confounders`.
    E : array (n,) or (n, k)
        Exposure columns over all ``n`` rows; values on rows outside ``rows`` are ignored (may be NaN).
    rows : bool array (n,), optional
        Usable rows (default: all).
    column_names : sequence of str, optional
        Names of the exposure columns (the confounder names come from ``base``).
    tol : float, optional
        Default: the confounder fit's ``tol``.

    Raises
    ------
    FitError
        A block or mask of the wrong shape, or a non-finite exposure value on a usable row.
    """
    tol = base.tol if tol is None else tol
    E, Ef, rows, names = _exposure_inputs(base, E, rows, column_names)
    pw = base.weights * rows
    chol = None
    plain_only = base.family == "negbin" and base.fit.theta_estimated
    if not plain_only and np.count_nonzero(pw) > base.Z.shape[1] + E.shape[1]:
        chol = _approximate_hessian(base, Ef, rows)  # None when not positive definite (collinear)
    return ExposureProblem(E=E, Ef=Ef, rows=rows, names=names, prior_weights=pw, chol=chol, tol=tol)
