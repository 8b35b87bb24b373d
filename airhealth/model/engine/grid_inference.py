"""Exact exposure-block inference for lag grids, without the full ``n x p^2`` information matrix.

A lag grid reports, per structure, only the exposure coefficients ``theta``, their covariance block,
the dispersion, deviance, log-likelihood and QAIC. With converged weights ``W``, ``A = Z.T W Z``,
``B = Z.T W E`` and ``C = E.T W E``, the covariance block is ``dispersion * (C - B.T A^-1 B)^-1``.
:func:`fit_exposure_only` finds ``G = A^-1 B`` without forming ``A``: iterative refinement
``G <- G + A0^-1 Z.T W (E - Z G)`` preconditioned with the confounder fit's (row-downdated) Cholesky
factor, run in the same loop as the coefficient iteration, a fixed-Hessian (chord) iteration
``beta <- beta + H0^-1 X_r.T (w (y - mu) mu / V(mu))`` with the factor of
:func:`airhealth.model.engine.grid.prepare_exposure`. The score is exact at every step, so the fixed point is
the maximum-likelihood estimate. Each step costs ``O(n p k)``; both iterations converge at the rate of the
weight change, the refinement falls back to the exact product if it stalls, and anything else the shared
work cannot do is fitted by the full fit. Method and accuracy argument: docs/engine.md.

Measured (benchmarks/bench_paths.py, one BLAS thread, 13 lag structures on the 14-year sample): 1.8-2.1x faster
than one plain fit per structure. A second path that returned full results (all coefficients) this way
gained only 1.1x and was folded back into the plain fit.

References
----------
Golub GH, Van Loan CF (2013). *Matrix Computations*, 4th ed., section 3.5.3 (iterative refinement).
Ortega JM, Rheinboldt WC (1970). *Iterative Solution of Nonlinear Equations in Several Variables*.
Academic Press, section 7.1 (chord / fixed-Jacobian Newton iterations and their linear convergence).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from scipy import special
from scipy.linalg import lapack

from ..._threads import fitting_threads
from .core import weighted_gram, workspace
from .families import Poisson
from .grid import ConfounderFit, plain_fit, prepare_exposure
from .irls import GLMFit, information_criterion

__all__ = ["ExposureFit", "exposure_block", "fit_exposure_only"]

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
class ExposureFit:
    """The exposure block of a fit ``y ~ Z + E``: what a lag grid reports, without the full covariance.

    Attributes
    ----------
    coef, cov, cov_unscaled, std_err
        Exposure coefficients ``theta`` (k,), their covariance block ``dispersion * (C - B.T A^-1 B)^-1``
        (k, k), the unscaled block, and its diagonal's square roots.
    deviance, loglik, pearson_chi2, dispersion
        As in :class:`~airhealth.model.engine.irls.GLMFit` for the whole model.
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
        """QAIC (quasi-Poisson) or AIC, exactly as :attr:`~airhealth.model.engine.irls.GLMFit.qaic`."""
        return information_criterion(self.family, self.loglik, self.dispersion, self.n_params, self.theta_estimated)


def exposure_block(fit: GLMFit, k: int, n_refinements: int = 0, exact: bool = True) -> ExposureFit:
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
    A = weighted_gram(Z, wt, workspace("grid", Z.shape))
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
    fallback: Callable[[], GLMFit] | None = None,
) -> ExposureFit:
    """Fit ``y ~ Z + E`` on ``rows`` and return only the exposure block, with exact inference.

    The coefficients come from the fixed-Hessian iteration (chord method) started at the confounder-only
    fit and stopped by the engine's strict criterion. The covariance of the exposure coefficients is the
    inverse Schur complement ``dispersion * (C - B.T A^-1 B)^-1`` with ``A = Z.T W Z``, ``B = Z.T W E``,
    ``C = E.T W E`` at the converged weights ``W``; ``A^-1 B`` is found by iterative refinement
    preconditioned with the confounder fit's factor, so the ``n pc^2`` product ``Z.T W Z`` is never
    formed (unless the refinement stalls). Nothing is approximated beyond floating point: the result
    equals :func:`~airhealth.model.engine.irls.fit_glm` on the subset to rounding.

    Parameters
    ----------
    base : ConfounderFit
        From :func:`~airhealth.model.engine.grid.fit_confounders`.
    E, rows, column_names, tol
        As in :func:`~airhealth.model.engine.grid.prepare_exposure`.
    max_iter : int
        Fixed-Hessian steps before the plain fit is used instead.
    fallback : callable, optional
        The full fit to use whenever the shared work cannot give the answer (estimated theta, too few
        rows, collinear columns, no convergence). Default: ``fit_glm`` on the stacked design
        (:func:`~airhealth.model.engine.grid.plain_fit`). ``compare`` passes the single fit of the same
        design, so such a structure gets exactly the single fit's answer, warnings and errors.

    Returns
    -------
    ExposureFit

    References
    ----------
    Golub GH, Van Loan CF (2013). *Matrix Computations*, 4th ed., sections 3.5.3 (iterative refinement)
    and 4.2 (Cholesky); McCullagh & Nelder (1989), section 2.5 (IRLS and the information matrix);
    Ortega JM, Rheinboldt WC (1970), section 7.1 (chord methods and their linear convergence).
    """
    with fitting_threads(*base.Z.shape):
        problem = prepare_exposure(base, E, rows, column_names, tol)
        k = problem.E.shape[1]
        if fallback is None:
            fallback = lambda: plain_fit(base, problem, max_iter)  # noqa: E731
        if problem.chol is None:
            return exposure_block(fallback(), k)
        return _shared_fit(base, problem, max_iter, fallback)


def _shared_fit(base: ConfounderFit, problem, max_iter: int, fallback) -> ExposureFit:
    fam, Ef, pw, k = base.family_object, problem.Ef, problem.prior_weights, problem.E.shape[1]
    coef, G, ZG, mu, n_iter, status = _joint_iteration(base, Ef, pw, problem.chol, fam, problem.tol, max_iter)
    if status == "failed":
        return exposure_block(fallback(), k)
    pc = base.Z.shape[1]
    wt = fam.working_weights(mu, pw)  # the converged weights
    exact = status == "stalled"
    if exact:
        G = _exact_projection(base, wt, Ef)
        ZG = None if G is None else base.Z @ G
    chol_s, info = (None, 1) if G is None else lapack.dpotrf(_schur(Ef, ZG, wt), lower=0, clean=1)
    if info != 0:  # not positive definite: let the full fit diagnose (names the collinear columns)
        return exposure_block(fallback(), k)
    cov_unscaled = lapack.dpotri(chol_s, lower=0)[0]
    cov_unscaled = np.triu(cov_unscaled) + np.triu(cov_unscaled, 1).T
    n_obs = float(pw.sum())
    df_resid = n_obs - coef.size
    pearson = fam.pearson_chi2(base.y, mu, pw)
    dispersion = pearson / df_resid if base.family == "quasipoisson" else 1.0
    cov = dispersion * cov_unscaled
    names = problem.names
    return ExposureFit(
        coef=coef[pc:], cov=cov, cov_unscaled=cov_unscaled, std_err=np.sqrt(np.diag(cov)),
        deviance=fam.deviance(base.y, mu, pw), loglik=fam.loglik(base.y, mu, pw), pearson_chi2=pearson,
        dispersion=dispersion, n_obs=n_obs, n_params=coef.size, df_resid=df_resid, n_iter=n_iter,
        n_refinements=n_iter, exact_product=exact, converged=True, family=base.family,
        theta=base.fit.theta, theta_estimated=False, column_names=None if names is None else names[pc:],
    )  # fmt: skip
