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

:func:`fit_exposure_only` returns only what a lag grid reports (exposure coefficients, their covariance
block, dispersion, deviance, log-likelihood, QAIC) and skips step 5: the covariance block is the inverse
Schur complement ``dispersion * (C - B.T A^-1 B)^-1`` with ``A^-1 B`` found by iterative refinement
preconditioned with the fixed Hessian's confounder factor, in the same loop as the coefficients
(method and accuracy argument in docs/engine.md).

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
from scipy import special
from scipy.linalg import blas, lapack

from ..errors import FitError
from .engine import (
    FamilyName,
    GLMFit,
    ThetaMethod,
    _cholesky,
    _weighted_gram,
    fit_glm,
    information_criterion,
    intercept_column,
    summarise,
    workspace,
)
from .engine_checks import finite_or_raise
from .families import NegativeBinomial, Poisson

__all__ = ["ConfounderFit", "ExposureFit", "fit_confounders", "fit_exposure_only", "fit_many", "fit_with_exposure"]

#: Excluding more than this fraction of rows forms the restricted Gram matrix directly, not by downdate.
DOWNDATE_MAX_FRACTION = 0.3
#: Refinement of ``A^-1 B`` stops when the largest correction is at most this fraction of the largest
#: entry; it falls back to the exact product when a correction is more than ``REFINE_STALL`` times the
#: previous one (no longer contracting, i.e. at the rounding floor or diverging) or after the step limit.
REFINE_RTOL = 1e-13
REFINE_STALL = 0.5
REFINE_MAX_STEPS = 30
#: Refinement of ``A^-1 B`` starts once the Newton decrement is below this fraction of the deviance
#: (the weights are then within ~1e-4 standard errors of their final values).
REFINE_START = 1e-8


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
        return NegativeBinomial(self.fit.theta) if self.family == "negbin" else Poisson()


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
    fam = NegativeBinomial(fit.theta) if family == "negbin" else Poisson()
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


# ------------------------------------------------------------------------- exposure block only
@dataclass(frozen=True)
class ExposureFit:
    """The exposure block of a fit ``y ~ Z + E``: what a lag grid reports, without the full covariance.

    Attributes
    ----------
    coef, cov, cov_unscaled, std_err
        Exposure coefficients ``theta`` (k,), their covariance block ``dispersion * (C - B.T A^-1 B)^-1``
        (k, k), the unscaled block, and its diagonal's square roots.
    deviance, loglik, pearson_chi2, dispersion
        As in :class:`~airhealth.model.engine.GLMFit` for the whole model.
    n_obs, n_params, df_resid
        Weight total of the usable rows, number of coefficients (confounders + exposure), residual df.
    n_iter, n_refinements, exact_product
        Fixed-Hessian steps, refinement steps for ``A^-1 B``, and whether the exact ``Z.T W Z`` had to be
        formed (refinement stalled or a fallback to the plain fit).
    """

    coef: np.ndarray
    cov: np.ndarray
    cov_unscaled: np.ndarray
    std_err: np.ndarray
    deviance: float
    loglik: float
    pearson_chi2: float
    dispersion: float
    n_obs: float
    n_params: int
    df_resid: float
    n_iter: int
    n_refinements: int
    exact_product: bool
    converged: bool
    family: str
    theta: float | None = None
    theta_estimated: bool = False
    column_names: tuple[str, ...] | None = None

    @property
    def qaic(self) -> float:
        """QAIC (quasi-Poisson) or AIC, exactly as :attr:`~airhealth.model.engine.GLMFit.qaic`."""
        return information_criterion(self.family, self.loglik, self.dispersion, self.n_params, self.theta_estimated)


def _exposure_part(fit: GLMFit, k: int, n_refinements: int = 0, exact: bool = True) -> ExposureFit:
    """The exposure block of a full :class:`GLMFit` (the fallback path)."""
    sl = slice(fit.n_params - k, fit.n_params)
    names = None if fit.column_names is None else fit.column_names[sl]
    return ExposureFit(
        coef=fit.coef[sl], cov=fit.cov[sl, sl], cov_unscaled=fit.cov_unscaled[sl, sl], std_err=fit.std_err[sl],
        deviance=fit.deviance, loglik=fit.loglik, pearson_chi2=fit.pearson_chi2, dispersion=fit.dispersion,
        n_obs=fit.n_obs, n_params=fit.n_params, df_resid=fit.df_resid, n_iter=fit.n_iter,
        n_refinements=n_refinements, exact_product=exact, converged=fit.converged, family=fit.family,
        theta=fit.theta, theta_estimated=fit.theta_estimated, column_names=names,
    )  # fmt: skip


def _exact_projection(base: ConfounderFit, wt: np.ndarray, Ef: np.ndarray) -> np.ndarray | None:
    """``A^-1 Z.T W E`` with the exact ``A = Z.T W Z`` (the fallback; one ``n pc^2`` product)."""
    Z = base.Z
    A = _weighted_gram(Z, wt, workspace("grid", Z.shape))
    chol_a, status = lapack.dpotrf(A, lower=0, clean=1, overwrite_a=1)
    if status != 0:
        return None
    return lapack.dpotrs(chol_a, Z.T @ (wt[:, None] * Ef), lower=0)[0]


def _joint_iteration(base: ConfounderFit, Ef, pw, chol, fam, tol, max_iter):
    """Fixed-Hessian iteration for the coefficients and refinement of ``G = A^-1 B``, sharing passes.

    Each step reads ``Z`` twice: once for ``Z.T [r, W (E - Z G)]`` (score and refinement residual) and
    once for ``Z [coef, G]``. Returns ``(coef, G, ZG, mu, n_iter, status)`` with status "ok", "stalled"
    (coefficients converged, ``G`` no longer contracting) or "failed" (deviance rose / no convergence).
    """
    Z, y, pc = base.Z, base.y, base.Z.shape[1]
    chol0 = np.array(chol[:pc, :pc], order="F")  # Cholesky factor of A0 (leading block of H0's factor)
    k = Ef.shape[1]
    coef = np.concatenate([base.coef, np.zeros(k)])
    G = lapack.dpotrs(chol0, _b0(chol, pc), lower=0)[0]  # A0^-1 B0, the start
    # work arrays in Fortran order, so each column is contiguous and filled by one BLAS gemv
    n = Z.shape[0]
    P, M, ZtM = (np.empty((m, 1 + k), order="F") for m in (n, n, pc))
    P[:, 0] = base.fit.linear_predictor - base.offset  # Z @ base.coef, known from the confounder fit
    for j in range(k):
        np.dot(Z, G[:, j], out=P[:, j + 1])
    previous = np.inf
    deviance = _deviance_function(fam, y, pw)
    with np.errstate(over="ignore", invalid="ignore"):
        eta = P[:, 0] + Ef @ coef[pc:] + base.offset
        mu = np.exp(eta)
        dev = deviance(eta, mu)
        refining = False  # G is refined once the weights are close to their final values
        for n_iter in range(1, max_iter + 1):
            wt = fam.working_weights(mu, pw)
            R = Ef - P[:, 1:]
            M[:, 0] = fam.score_residuals(y, mu, pw)
            np.dot(Z.T, M[:, 0], out=ZtM[:, 0])
            if refining:
                np.multiply(wt[:, None], R, out=M[:, 1:])
                for j in range(1, 1 + k):
                    np.dot(Z.T, M[:, j], out=ZtM[:, j])
            g = np.concatenate([ZtM[:, 0], Ef.T @ M[:, 0]])
            step = lapack.dpotrs(chol, g, lower=0)[0]
            coef = coef + step
            if refining:
                correction = lapack.dpotrs(chol0, ZtM[:, 1:], lower=0)[0]
                G = G + correction
                _fill(P, Z, coef[:pc], G)
            else:
                np.dot(Z, coef[:pc], out=P[:, 0])
            eta = P[:, 0] + Ef @ coef[pc:] + base.offset
            mu = np.exp(eta)
            dev_new = deviance(eta, mu)
            if not np.isfinite(dev_new) or dev_new - dev > tol * (abs(dev) + 0.1):
                return coef, G, P[:, 1:], mu, n_iter, "failed"
            dev = dev_new
            decrement = step @ g
            if not refining:
                refining = decrement <= REFINE_START * (abs(dev) + 0.1)
                continue
            size = float(np.abs(correction).max()) / max(float(np.abs(G).max()), 1e-300)
            # the step just taken was below the strict stop, so the error left is ~rate x step (~1e-2 x tol SE)
            if decrement <= tol * tol * (abs(dev) + 0.1):
                if _refined(correction, G, Ef, R, wt):
                    return coef, G, P[:, 1:], mu, n_iter, "ok"
                if size > REFINE_STALL * previous:
                    return coef, G, P[:, 1:], mu, n_iter, "stalled"
            previous = size
    return coef, G, P[:, 1:], mu, max_iter, "failed"


def _fill(P: np.ndarray, Z: np.ndarray, v: np.ndarray, G: np.ndarray) -> None:
    """``P = Z [v, G]`` column by column (BLAS gemv; ``gemm`` with 2-8 right-hand columns was measured
    2x slower per column than ``gemv`` on these shapes)."""
    np.dot(Z, v, out=P[:, 0])
    for j in range(G.shape[1]):
        np.dot(Z, G[:, j], out=P[:, j + 1])


def _refined(correction: np.ndarray, G: np.ndarray, Ef: np.ndarray, R: np.ndarray, wt: np.ndarray) -> bool:
    """Whether ``G`` is refined enough for an exact Schur complement.

    True when every column's last correction is at most ``REFINE_RTOL`` of the column, or when the error
    it can leave in the Schur complement is: that error is second order (see :func:`_schur`), about
    ``d_j^2 * C_jj / S_jj`` relative for a relative correction ``d_j`` (``G.T A G = B.T A^-1 B <= C``);
    the remaining error is smaller still, by the contraction factor squared.
    """
    d = np.abs(correction).max(axis=0) / np.maximum(np.abs(G).max(axis=0), 1e-300)
    if np.all(d <= REFINE_RTOL):
        return True
    c = np.einsum("ij,ij,i->j", Ef, Ef, wt)
    s = np.einsum("ij,ij,i->j", R, R, wt)
    return bool(np.all(d * d * c <= REFINE_RTOL * s))


def _deviance_function(fam, y: np.ndarray, w: np.ndarray):
    """``deviance(eta, mu)``; for Poisson without logarithms, ``2 sum w (y log y - y - y eta + mu)``,
    using ``log(mu) = eta`` (the constant part is computed once)."""
    if not isinstance(fam, Poisson):
        return lambda eta, mu: fam.deviance(y, mu, w)
    constant = float(w @ (special.xlogy(y, y) - y))
    wy = w * y
    return lambda eta, mu: 2.0 * (constant - float(wy @ eta) + float(w @ mu))


def _schur(Ef: np.ndarray, ZG: np.ndarray, wt: np.ndarray) -> np.ndarray:
    """``C - B.T A^-1 B`` as ``R.T W R`` with ``R = E - Z G``: symmetric, and second-order accurate in
    the error of ``G`` (the cross term vanishes because ``Z.T W R = 0`` at the exact ``G``)."""
    R = Ef - ZG
    return np.asfortranarray(R.T @ (wt[:, None] * R))


def _b0(chol: np.ndarray, pc: int) -> np.ndarray:
    """``Z.T W0 E`` recovered from the factor of ``H0``: the off-diagonal block is ``R11.T R12``."""
    return chol[:pc, :pc].T @ chol[:pc, pc:]


def fit_exposure_only(
    base: ConfounderFit,
    E,
    rows=None,
    *,
    tol: float | None = None,
    max_iter: int = 50,
    column_names: Sequence[str] | None = None,
) -> ExposureFit:
    """Fit ``y ~ Z + E`` on ``rows`` and return only the exposure block, with exact inference.

    The coefficients come from the fixed-Hessian iteration of :func:`fit_with_exposure` (stopped by the
    same strict criterion, without its exact Newton polish). The covariance of the exposure coefficients is the
    inverse Schur complement ``dispersion * (C - B.T A^-1 B)^-1`` with ``A = Z.T W Z``, ``B = Z.T W E``,
    ``C = E.T W E`` at the converged weights ``W``; ``A^-1 B`` is found by iterative refinement
    preconditioned with the confounder fit's factor, so the ``n pc^2`` product ``Z.T W Z`` is never
    formed (unless the refinement stalls). Nothing is approximated beyond floating point: the result
    equals :func:`~airhealth.model.engine.fit_glm` on the subset to rounding.

    Parameters are those of :func:`fit_with_exposure`.

    Returns
    -------
    ExposureFit

    References
    ----------
    Golub GH, Van Loan CF (2013). *Matrix Computations*, 4th ed., sections 3.5.3 (iterative refinement)
    and 4.2 (Cholesky); McCullagh & Nelder (1989), section 2.5 (IRLS and the information matrix).
    """
    tol, E, Ef, rows, names, pw, chol = _prepare(base, E, rows, column_names, tol)
    k = E.shape[1]
    if chol is None:
        return _exposure_part(_plain(base, E, rows, names, tol, max_iter), k)
    fam = base.family_object
    coef, G, ZG, mu, n_iter, status = _joint_iteration(base, Ef, pw, chol, fam, tol, max_iter)
    if status == "failed":
        return _exposure_part(_plain(base, E, rows, names, tol, max_iter), k)
    pc = base.Z.shape[1]
    wt = fam.working_weights(mu, pw)  # the converged weights
    exact = status == "stalled"
    if exact:
        G = _exact_projection(base, wt, Ef)
        ZG = None if G is None else base.Z @ G
    chol_s, info = (None, 1) if G is None else lapack.dpotrf(_schur(Ef, ZG, wt), lower=0, clean=1)
    if info != 0:  # not positive definite: let the plain path diagnose (names the collinear columns)
        return _exposure_part(_plain(base, E, rows, names, tol, max_iter), k)
    cov_unscaled = lapack.dpotri(chol_s, lower=0)[0]
    cov_unscaled = np.triu(cov_unscaled) + np.triu(cov_unscaled, 1).T
    steps = n_iter
    n_obs = float(pw.sum())
    df_resid = n_obs - coef.size
    pearson = fam.pearson_chi2(base.y, mu, pw)
    dispersion = pearson / df_resid if base.family == "quasipoisson" else 1.0
    cov = dispersion * cov_unscaled
    return ExposureFit(
        coef=coef[pc:], cov=cov, cov_unscaled=cov_unscaled, std_err=np.sqrt(np.diag(cov)),
        deviance=fam.deviance(base.y, mu, pw), loglik=fam.loglik(base.y, mu, pw), pearson_chi2=pearson,
        dispersion=dispersion, n_obs=n_obs, n_params=coef.size, df_resid=df_resid, n_iter=n_iter,
        n_refinements=steps, exact_product=exact, converged=True, family=base.family,
        theta=base.fit.theta, theta_estimated=False, column_names=None if names is None else names[pc:],
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
