"""Shared-work fitting of many models that differ only in a few exposure columns and in the usable rows.

A lag grid fits ``y ~ Z + E_k`` for many exposure blocks ``E_k`` (one to a few columns: a single lag, a
moving average, a distributed lag basis) over the same confounder block ``Z`` (intercept, time spline,
temperature splines, weekday; typically ~100 columns), each on the rows where its exposure is observed.
Fitting each model from scratch costs one ``n x p^2`` product per IRLS iteration. Here the confounder-only
model is fitted once (:func:`fit_confounders`) and each exposure model (:func:`fit_with_exposure`) reuses it:

1. Warm start at the confounder-only coefficients with zero exposure coefficients.
2. Fixed approximate Hessian ``H0 = X_r.T W0 X_r`` with the confounder fit's working weights ``W0`` on the
   usable rows ``r``: its confounder block is the stored all-row ``Z.T W0 Z`` minus the contribution of the
   excluded rows (a cheap downdate; formed directly when many rows are excluded); the blocks with the
   exposure columns cost ``n p k``. ``H0`` is factorised once by Cholesky.
3. Iterate ``beta <- beta + H0^-1 X_r.T (w (y - mu) mu / V(mu))``. The score is exact at every step, so
   the fixed point is exactly the maximum-likelihood estimate; the iteration is a quasi-Newton (chord)
   method whose linear rate is ``||I - H0^-1 H(beta)||``, small because the exposure effects and the shift
   caused by the excluded rows change ``W`` little. Each step costs ``O(n p)``.
4. Stop when ``step.T H0 step <= tol^2 (|dev| + 0.1)`` (the squared step measured in the information
   metric, i.e. a step of about ``tol * sqrt(dev)`` standard errors). If the deviance increases, the
   values become non-finite or ``max_iter`` steps do not suffice, the model is refitted by the plain
   :func:`~airhealth.model.engine.fit_glm` (warm-started), so the answer is always the exact MLE.
5. At convergence the exact information matrix is formed once (so standard errors are exact) and one
   exact Newton step with it polishes the coefficients to full precision.

:func:`airhealth.model.grid_inference.fit_exposure_only` returns only what a lag grid reports
(exposure coefficients, their covariance block, dispersion, deviance, log-likelihood, QAIC) and skips
step 5: the covariance block is the inverse Schur complement ``dispersion * (C - B.T A^-1 B)^-1`` with
``A^-1 B`` found by iterative refinement preconditioned with the fixed Hessian's confounder factor, in
the same loop as the coefficients (method and accuracy argument in docs/engine.md).

The negative binomial family with estimated theta always uses the plain path.

References
----------
Ortega JM, Rheinboldt WC (1970). *Iterative Solution of Nonlinear Equations in Several Variables*.
Academic Press, section 7.1 (chord / fixed-Jacobian Newton iterations and their linear convergence).
Golub GH, Van Loan CF (2013). *Matrix Computations*, 4th ed., section 6.5 (updating and downdating
Gram matrices).
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass

import numpy as np
from scipy.linalg import blas, lapack

from ..errors import FitError
from .engine import (
    FamilyName,
    GLMFit,
    ThetaMethod,
    _cholesky,
    _weighted_gram,
    fit_glm,
    intercept_column,
    summarise,
    workspace,
)
from .engine_checks import finite_or_raise
from .families import NegativeBinomial, Poisson

__all__ = ["ConfounderFit", "fit_confounders", "fit_many", "fit_with_exposure"]

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

    Parameters are those of :func:`~airhealth.model.engine.fit_glm`; ``Z`` is the confounder block.
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
    upper = _weighted_gram(Zc, w0, workspace("design", Zc.shape))
    info = np.triu(upper) + np.triu(upper, 1).T
    return ConfounderFit(
        fit=fit, Z=Zc, y=np.asarray(y, dtype=float), offset=off, weights=w, working_weights=w0, info=info,
        family=family, theta_method=theta_method, tol=tol, has_intercept=intercept_column(Zc),
        column_names=fit.column_names,
    )  # fmt: skip


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


def _plain(base: ConfounderFit, E, rows, names, tol, max_iter, start=None) -> GLMFit:
    """The reference path: ``fit_glm`` on the stacked design restricted to ``rows``."""
    X = np.hstack([base.Z, np.where(rows[:, None], E, 0.0)])[rows]
    estimated = base.family == "negbin" and base.fit.theta_estimated
    theta = base.fit.theta if base.family == "negbin" and not estimated else None
    if start is None:
        start = np.concatenate([base.coef, np.zeros(E.shape[1])])
    return fit_glm(
        X, base.y[rows], family=base.family, offset=base.offset[rows], weights=base.weights[rows],
        start=start, theta=theta, theta_method=base.theta_method, tol=tol, max_iter=max(max_iter, 100),
        column_names=names,
    )  # fmt: skip


def _approximate_hessian(base: ConfounderFit, Ef: np.ndarray, rows: np.ndarray) -> np.ndarray | None:
    """Cholesky factor of ``X_r.T W0 X_r``, or None when it is not positive definite."""
    Z, w0 = base.Z, base.working_weights
    excluded = np.flatnonzero(~rows & (w0 > 0))
    if excluded.size <= DOWNDATE_MAX_FRACTION * Z.shape[0]:
        A = base.info.copy()
        if excluded.size:
            D = Z[excluded] * np.sqrt(w0[excluded])[:, None]
            A -= blas.dsyrk(1.0, D.T, trans=0, lower=0)  # upper triangle is what dpotrf reads
    else:
        A = _weighted_gram(Z, w0 * rows, workspace("grid", Z.shape))
    WE = (w0 * rows)[:, None] * Ef
    pc, k = A.shape[0], Ef.shape[1]
    H = np.empty((pc + k, pc + k), order="F")
    H[:pc, :pc] = A
    H[:pc, pc:] = Z.T @ WE
    H[pc:, pc:] = Ef.T @ WE
    c, status = lapack.dpotrf(H, lower=0, clean=1, overwrite_a=1)
    return c if status == 0 else None


def _prepare(base: ConfounderFit, E, rows, column_names, tol):
    """Checked inputs and the fixed Hessian factor, or ``None`` for the factor when the plain path is needed."""
    tol = base.tol if tol is None else tol
    E, Ef, rows, names = _exposure_inputs(base, E, rows, column_names)
    pw = base.weights * rows
    chol = None
    plain_only = base.family == "negbin" and base.fit.theta_estimated
    if not plain_only and np.count_nonzero(pw) > base.Z.shape[1] + E.shape[1]:
        chol = _approximate_hessian(base, Ef, rows)  # None when not positive definite (collinear)
    return tol, E, Ef, rows, names, pw, chol


def _linear_predictor(base: ConfounderFit, coef: np.ndarray, Ef: np.ndarray) -> np.ndarray:
    pc = base.Z.shape[1]
    return base.Z @ coef[:pc] + Ef @ coef[pc:] + base.offset


def _chord(base: ConfounderFit, Ef, pw, chol, fam, tol, max_iter):
    """Fixed-Hessian iteration from the confounder fit (steps 1-4 of the module docstring).

    Returns ``(coef, n_iter, ok)``; ``ok`` is False when the deviance rose or became non-finite (``coef``
    is then the start) or when ``max_iter`` steps did not converge (``coef`` is the last iterate).
    """
    Z, y = base.Z, base.y
    start = np.concatenate([base.coef, np.zeros(Ef.shape[1])])
    coef = start
    with np.errstate(over="ignore", invalid="ignore"):
        mu = np.exp(_linear_predictor(base, coef, Ef))
        dev = fam.deviance(y, mu, pw)
        for n_iter in range(1, max_iter + 1):
            r = fam.score_residuals(y, mu, pw)
            g = np.concatenate([Z.T @ r, Ef.T @ r])
            step = lapack.dpotrs(chol, g, lower=0)[0]
            new = coef + step
            mu_new = np.exp(_linear_predictor(base, new, Ef))
            dev_new = fam.deviance(y, mu_new, pw)
            if not np.isfinite(dev_new) or dev_new - dev > tol * (abs(dev) + 0.1):
                return start, n_iter, False
            coef, mu, dev = new, mu_new, dev_new
            if step @ g <= tol * tol * (abs(dev) + 0.1):
                return coef, n_iter, True
    return coef, max_iter, False


def fit_with_exposure(
    base: ConfounderFit,
    E,
    rows=None,
    *,
    tol: float | None = None,
    max_iter: int = 50,
    column_names: Sequence[str] | None = None,
) -> GLMFit:
    """Fit ``y ~ Z + E`` on ``rows`` reusing the confounder-only fit (method in the module docstring).

    Use this when the full covariance matrix (all coefficients) or the fitted values are needed; for
    the exposure block alone :func:`fit_exposure_only` is several times faster.

    Parameters
    ----------
    base : ConfounderFit
        From :func:`fit_confounders`.
    E : array (n,) or (n, k)
        Exposure columns over all ``n`` rows; values on rows outside ``rows`` are ignored (may be NaN).
    rows : bool array (n,), optional
        Usable rows (default: all).
    tol : float, optional
        Default: the confounder fit's ``tol``.
    max_iter : int
        Steps with the fixed Hessian before falling back to the plain fit.
    column_names : sequence of str, optional
        Names of the exposure columns (the confounder names come from ``base``).

    Returns
    -------
    GLMFit
        The same as ``fit_glm(np.hstack([Z, E])[rows], y[rows], ...)`` with the base's family, offset and
        weights; ``fitted`` and ``linear_predictor`` cover the usable rows only.
    """
    tol, E, Ef, rows, names, pw, chol = _prepare(base, E, rows, column_names, tol)
    if chol is None:  # estimated theta, too few rows or collinear: the plain path (with its clear errors)
        return _plain(base, E, rows, names, tol, max_iter)
    fam = base.family_object
    coef, n_iter, ok = _chord(base, Ef, pw, chol, fam, tol, max_iter)
    if not ok:
        return _plain(base, E, rows, names, tol, max_iter, start=coef)
    return _finish(base, coef, Ef, rows, pw, fam, n_iter, names)


def _finish(base, coef, Ef, rows, pw, fam, n_iter, names) -> GLMFit:
    """Exact information at the converged coefficients and the summary on the usable rows."""
    Z, pc = base.Z, base.Z.shape[1]
    with np.errstate(over="ignore"):
        mu_all = np.exp(_linear_predictor(base, coef, Ef))
    # rows outside `rows` have zero weight, so the full-row product equals the restricted one
    sw = np.sqrt(fam.working_weights(mu_all, pw))
    buf = workspace("grid", (Z.shape[0], coef.size))
    np.multiply(Z, sw[:, None], out=buf[:, :pc])
    np.multiply(Ef, sw[:, None], out=buf[:, pc:])
    info = blas.dsyrk(1.0, buf.T, trans=0, lower=0)
    chol = _cholesky(info, names, lambda: buf)
    # one exact Newton step with the exact information polishes the chord iterate to full precision;
    # the step is ~tol standard errors, so the information (and covariance) at the polished point is
    # the same to rounding
    r = fam.score_residuals(base.y, mu_all, pw)
    coef = coef + lapack.dpotrs(chol, np.concatenate([Z.T @ r, Ef.T @ r]), lower=0)[0]
    with np.errstate(over="ignore"):
        eta_all = _linear_predictor(base, coef, Ef)
        mu_all = np.exp(eta_all)
    idx = np.flatnonzero(rows)
    eta, mu, w = eta_all[idx], mu_all[idx], pw[idx]
    return summarise(
        coef=coef, eta=eta, mu=mu, info_chol=chol, y=base.y[idx], w=w, offset=base.offset[idx], fam=fam,
        family=base.family, n_iter=n_iter, converged=True, n_halvings=0, names=names,
        has_intercept=base.has_intercept,
    )  # fmt: skip


def fit_many(
    Z,
    y,
    candidates: Iterable[tuple[np.ndarray, np.ndarray | None]],
    *,
    family: FamilyName = "quasipoisson",
    offset=None,
    weights=None,
    tol: float = 1e-10,
    max_iter: int = 50,
    confounder_names: Sequence[str] | None = None,
) -> Iterator[GLMFit]:
    """Fit the confounder model once, then yield one :class:`GLMFit` per ``(E, rows)`` candidate."""
    base = fit_confounders(Z, y, family=family, offset=offset, weights=weights, tol=tol, column_names=confounder_names)
    for E, rows in candidates:
        yield fit_with_exposure(base, E, rows, tol=tol, max_iter=max_iter)
