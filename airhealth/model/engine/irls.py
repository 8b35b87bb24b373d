"""Matrix-level GLM fitting engine: Poisson, quasi-Poisson and negative binomial with a log link.

This module knows nothing about data frames or model terms: it takes a design matrix ``X``, counts ``y``,
an optional offset and prior (frequency) weights, and returns a :class:`GLMFit`.

The fit is iteratively reweighted least squares (IRLS) written in Newton form: at each iteration the
information matrix ``X.T W X`` is formed with one BLAS ``syrk`` call on a preallocated ``n x p`` buffer,
factorised by Cholesky, and the step ``(X.T W X)^-1 X.T (w (y - mu) mu / V(mu))`` is taken, halving it
while the deviance increases or is not finite. Convergence is R's criterion
``|dev - dev_old| / (|dev| + 0.1) <= tol``. At convergence the information matrix is formed once more at
the final coefficients, so ``cov_unscaled`` is exact there.

References
----------
McCullagh P, Nelder JA (1989). *Generalized Linear Models*, 2nd ed. Chapman & Hall, section 2.5.
R Core Team. ``glm.fit`` in package stats (convergence criterion and starting values ``mu = y + 0.1``).
Peng RD, Dominici F, Louis TA (2006). Model choice in time series studies of air pollution and
mortality. *J R Stat Soc A* 169:179-203 (QAIC for quasi-Poisson models).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.linalg import lapack

from ..._threads import policy_threads
from ..._warn import warn_user
from ...errors import ConvergenceWarning, FitError
from .checks import (
    RANK_TOL,
    FamilyName,
    ThetaMethod,
    as_vector,
    collinearity_error,
    validate_inputs,
    validate_options,
)
from .core import layout, workspace
from .core import weighted_gram as _weighted_gram
from .degenerate import check_dispersion, check_response, collapsed_weights_error, not_converged_message
from .families import NegativeBinomial, Poisson
from .strata import checked_strata, within_strata
from .theta_fit import fit_theta

__all__ = ["FamilyName", "GLMFit", "ThetaMethod", "fit_glm", "information_criterion"]

MAX_HALVINGS = 40
#: Refresh the information matrix when a step's predicted decrease exceeds this fraction of the last.
REFRESH_RATIO = 0.05


@dataclass(frozen=True)
class GLMFit:
    """Result of a GLM fit with a log link.

    Attributes
    ----------
    coef, cov_unscaled, cov, std_err
        Coefficients, ``(X.T W X)^-1`` at the converged coefficients, ``dispersion * cov_unscaled`` and
        the square roots of its diagonal.
    fitted, linear_predictor
        ``mu`` and ``eta = X coef + offset`` for every input row.
    deviance, null_deviance, pearson_chi2
        Deviance of the fit, of the intercept-only model with the same offset (of ``eta = offset`` when
        the design has no constant column), and Pearson's statistic.
    loglik
        Full log-likelihood at the fit; for quasi-Poisson it is the Poisson log-likelihood.
    n_obs, n_params, df_resid
        Sum of the prior weights, number of coefficients, and ``n_obs - n_params``.
    dispersion
        Pearson chi-square over ``df_resid`` for quasi-Poisson, 1 otherwise.
    theta, theta_estimated
        Negative binomial shape (``None`` for the other families) and whether it was estimated.
    family
        The family fitted: ``"poisson"`` when a negative binomial fell back to its Poisson limit.
    notes
        Plain-language notes on how the fit was obtained (e.g. that Poisson fallback and why).
    """

    coef: np.ndarray
    cov_unscaled: np.ndarray
    cov: np.ndarray
    std_err: np.ndarray
    fitted: np.ndarray
    linear_predictor: np.ndarray
    deviance: float
    null_deviance: float
    pearson_chi2: float
    loglik: float
    df_resid: float
    n_obs: float
    n_params: int
    dispersion: float
    n_iter: int
    converged: bool
    family: str
    theta: float | None = None
    theta_estimated: bool = False
    n_step_halvings: int = 0
    column_names: tuple[str, ...] | None = None
    notes: tuple[str, ...] = ()
    n_strata: int = 0  # stratum intercepts eliminated (conditional Poisson); counted in df_resid and QAIC

    @property
    def qaic(self) -> float:
        """QAIC for quasi-Poisson, plain AIC for Poisson and negative binomial.

        Quasi-Poisson: ``-2 loglik_Poisson / dispersion + 2 n_params`` (Peng, Dominici & Louis 2006).
        Poisson: ``-2 loglik + 2 n_params``. Negative binomial: ``-2 loglik + 2 (n_params + 1)`` when
        ``theta`` was estimated (theta counts as a parameter), ``+ 2 n_params`` when it was supplied.
        """
        k = self.n_params + self.n_strata
        return information_criterion(self.family, self.loglik, self.dispersion, k, self.theta_estimated)


def information_criterion(family: str, loglik: float, dispersion: float, n_params: int, theta_estimated: bool) -> float:
    """QAIC (quasi-Poisson) or AIC (Poisson, negative binomial); see :attr:`GLMFit.qaic`."""
    if family == "quasipoisson":
        return -2.0 * loglik / dispersion + 2.0 * n_params
    return -2.0 * loglik + 2.0 * (n_params + int(theta_estimated))


@dataclass
class _State:
    """Where an IRLS run is (or ended)."""

    coef: np.ndarray
    eta: np.ndarray
    mu: np.ndarray
    deviance: float
    n_iter: int = 0
    converged: bool = False
    n_halvings: int = 0
    last_change: float = np.inf
    chol: np.ndarray | None = None  # Cholesky factor in use (upper)
    fresh: bool = False  # whether `chol` is the exact information at the current coefficients
    n_factorisations: int = 0
    decrement: float = np.inf  # last predicted deviance decrease over (|deviance| + 0.1)
    stalled: bool = False  # stopped because no step decreased the deviance along the exact Newton direction


# --------------------------------------------------------------------------------- linear algebra core
def _cholesky(info: np.ndarray, names, weighted_x) -> np.ndarray:
    """Upper Cholesky factor of ``info``; a rank problem raises :class:`FitError` naming the columns.

    ``weighted_x`` is a callable returning ``sqrt(W) X`` for the collinearity diagnosis.
    """
    diag = info.diagonal().copy()
    c, status = lapack.dpotrf(info, lower=0, clean=1, overwrite_a=1)
    if status == 0:
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = c.diagonal() ** 2 / diag
        if np.all(ratio > RANK_TOL):
            return c
    raise collinearity_error(weighted_x(), names)


def _inverse_from_cholesky(c: np.ndarray) -> np.ndarray:
    inv, status = lapack.dpotri(c, lower=0)
    if status != 0:  # pragma: no cover - the factor passed the rank check
        raise FitError("Could not invert the information matrix; the design is numerically singular.")
    return np.triu(inv) + np.triu(inv, 1).T


# ---------------------------------------------------------------------------------------------- IRLS
def _eval(fam, X, coef, offset, y, w, strata=None):
    with np.errstate(over="ignore", invalid="ignore"):
        eta = X @ coef + offset
        if strata is not None:  # the stratum intercepts at their maximum for these coefficients
            eta = strata.profile(eta, y, w)
        mu = np.exp(eta)
        dev = fam.deviance(y, mu, w)
    return eta, mu, dev


def _irls(X, y, w, offset, fam, start, tol, max_iter, names, buf, strata=None) -> _State:
    """IRLS in Newton form with lazily refreshed information; see :func:`fit_glm` for the scheme.

    With ``strata`` the stratum intercepts are profiled out at every evaluation and the information is
    formed on the weighted-demeaned design (:mod:`airhealth.model.engine.strata`). On return ``s.chol`` is
    the exact information factor at the returned coefficients' predecessor and
    the coefficients have had one polishing Newton step (when converged). No warning is issued here.
    """
    if start is None:
        mu0 = y + 0.1
        eta0 = np.log(mu0)
        ww = fam.working_weights(mu0, w)
        Xw = within_strata(X, ww, strata, names)
        chol = _cholesky(_weighted_gram(Xw, ww, buf), names, lambda: buf)
        rhs = Xw.T @ (ww * (eta0 - offset) + fam.score_residuals(y, mu0, w))
        coef = lapack.dpotrs(chol, rhs, lower=0)[0]
        eta, mu, dev = _eval(fam, X, coef, offset, y, w, strata)
        if not np.isfinite(dev):
            raise FitError("The first IRLS step gave non-finite fitted values; supply starting coefficients.")
        dev_old = fam.deviance(y, mu0, w)
        s = _State(coef, eta, mu, dev, n_iter=1, chol=chol, n_factorisations=1)
        s.last_change = abs(dev - dev_old) / (abs(dev) + 0.1)
    else:
        coef = np.array(start, dtype=float)
        eta, mu, dev = _eval(fam, X, coef, offset, y, w, strata)
        if not np.isfinite(dev):
            raise FitError("The starting coefficients give non-finite fitted values; use other starting values.")
        s = _State(coef, eta, mu, dev)
    g = _iterate(s, X, y, w, fam, tol, max_iter, names, buf, strata)
    if not s.fresh:
        _refresh(s, X, w, fam, names, buf, strata)
    if s.converged:  # polish: one exact Newton step with the exact information
        s.coef = s.coef + lapack.dpotrs(s.chol, g, lower=0)[0]
        s.eta, s.mu, s.deviance = _eval(fam, X, s.coef, offset, y, w, strata)
    return s


def _refresh(s: _State, X, w, fam, names, buf, strata=None) -> None:
    ww = fam.working_weights(s.mu, w)
    s.chol = _cholesky(_weighted_gram(within_strata(X, ww, strata, names), ww, buf), names, lambda: buf)
    s.fresh = True
    s.n_factorisations += 1


def _iterate(s: _State, X, y, w, fam, tol, max_iter, names, buf, strata=None) -> np.ndarray:
    """Run steps until convergence or ``max_iter``; return the score at the final coefficients."""
    q_prev = np.inf
    while True:
        if s.chol is None:
            _refresh(s, X, w, fam, names, buf, strata)
        g = X.T @ fam.score_residuals(y, s.mu, w)
        delta = lapack.dpotrs(s.chol, g, lower=0)[0]
        q = float(delta @ g)  # predicted deviance decrease (exact for a fresh factor)
        s.decrement = q / (abs(s.deviance) + 0.1)
        if s.last_change <= tol and s.decrement <= tol * tol:
            s.converged = True
            return g
        if s.n_iter >= max_iter:
            return g
        if not _line_search(s, X, y, w, fam, delta, tol, strata):
            if s.fresh:
                s.stalled = True
                return g  # no descent even along the exact Newton direction: stop, not converged
            _refresh(s, X, w, fam, names, buf, strata)  # stale factor: refresh and retry
            continue
        s.fresh = False
        if q > REFRESH_RATIO * q_prev:  # slow progress with this factor: use the exact one next
            s.chol = None
        q_prev = q


def _line_search(s: _State, X, y, w, fam, delta, tol, strata=None) -> bool:
    """Take ``delta`` (halved while the deviance rises or is not finite); False if that fails.

    With a stale factor a rise is reported at once (False) so the caller can refresh the factor.
    """
    x_delta = X @ delta
    t = 1.0
    with np.errstate(over="ignore", invalid="ignore"):
        for _ in range(MAX_HALVINGS if s.fresh else 1):
            eta = s.eta + t * x_delta
            if strata is not None:
                eta = strata.profile(eta, y, w)
            mu = np.exp(eta)
            dev = fam.deviance(y, mu, w)
            if np.isfinite(dev) and dev - s.deviance <= tol * (abs(s.deviance) + 0.1):
                break
            t *= 0.5
            s.n_halvings += int(s.fresh)
        else:
            return False
    s.coef = s.coef + t * delta
    s.eta, s.mu = eta, mu
    s.last_change = abs(dev - s.deviance) / (abs(dev) + 0.1)
    s.deviance = dev
    s.n_iter += 1
    return True


def _warn_if_not_converged(s: _State, tol: float, what: str = "IRLS") -> None:
    if not s.converged:  # the message names only the criteria that failed
        warn_user(not_converged_message(s, tol, what, MAX_HALVINGS), ConvergenceWarning)


# ------------------------------------------------------------------------------------------ summaries
def intercept_column(X: np.ndarray) -> bool:
    """Whether ``X`` has a constant non-zero column (checked cheaply on a few rows first)."""
    head = X[: min(len(X), 32)]
    cand = np.flatnonzero((X[0] != 0) & np.all(head == X[0], axis=0))
    return any(np.all(X[:, j] == X[0, j]) for j in cand)


def null_deviance(fam, y, w, offset, has_intercept: bool) -> float:
    """Deviance of the intercept-only model with the offset (``eta = offset`` without intercept)."""
    base = np.exp(offset)
    if not has_intercept:
        return fam.deviance(y, base, w)
    a = np.log((w @ y) / (w @ base))  # exact for Poisson
    if isinstance(fam, NegativeBinomial):
        for _ in range(50):  # Newton on the intercept with theta fixed
            mu = base * np.exp(a)
            step = (fam.score_residuals(y, mu, w).sum()) / fam.working_weights(mu, w).sum()
            a += step
            if abs(step) < 1e-13:
                break
    return fam.deviance(y, base * np.exp(a), w)


def summarise(
    *,
    coef,
    eta,
    mu,
    info_chol,
    y,
    w,
    offset,
    fam,
    family,
    n_iter,
    converged,
    n_halvings,
    names,
    has_intercept,
    theta_estimated=False,
    notes=(),
    response_name=None,
    strata=None,
) -> GLMFit:
    """Assemble a :class:`GLMFit` from a converged state and the Cholesky factor of the information.

    With ``strata`` the eliminated intercepts count as parameters: ``df_resid = n - p - n_strata`` (as R's
    ``glm`` with stratum indicator columns) and the null model is the strata-only model.
    """
    p = coef.size
    n_obs = float(w.sum())
    n_strata = 0 if strata is None else strata.n_strata
    df_resid = n_obs - p - n_strata
    cov_unscaled = _inverse_from_cholesky(info_chol)
    pearson = fam.pearson_chi2(y, mu, w)
    dispersion = pearson / df_resid if family == "quasipoisson" else 1.0
    check_dispersion(family, pearson, df_resid, response_name)
    cov = dispersion * cov_unscaled
    return GLMFit(
        coef=coef, cov_unscaled=cov_unscaled, cov=cov, std_err=np.sqrt(np.diag(cov)), fitted=mu,
        linear_predictor=eta, deviance=fam.deviance(y, mu, w),
        null_deviance=null_deviance(fam, y, w, offset, has_intercept) if strata is None
        else fam.deviance(y, strata.null_means(offset, y, w), w), pearson_chi2=pearson,
        loglik=fam.loglik(y, mu, w), df_resid=df_resid, n_obs=n_obs, n_params=p, dispersion=dispersion,
        n_iter=n_iter, converged=converged, family=family,
        theta=fam.theta if isinstance(fam, NegativeBinomial) else None, theta_estimated=theta_estimated,
        n_step_halvings=n_halvings, column_names=names, notes=tuple(notes), n_strata=n_strata,
    )  # fmt: skip


# ------------------------------------------------------------------------------------------ public API
@policy_threads  # BLAS threads chosen for the design's size (airhealth._threads), restored afterwards
def fit_glm(
    X,
    y,
    *,
    family: FamilyName = "quasipoisson",
    offset=None,
    weights=None,
    start=None,
    theta: float | None = None,
    theta_method: ThetaMethod = "ml",
    tol: float = 1e-10,
    max_iter: int = 100,
    column_names: Sequence[str] | None = None,
    response_name: str | None = None,
    strata=None,
) -> GLMFit:
    """Fit a log-link GLM for counts by IRLS.

    Parameters
    ----------
    X : array (n, p)
        Design matrix (include the intercept column yourself).
    y : array (n,)
        Counts (validated by the caller; only non-negativity is checked here).
    family : {"poisson", "quasipoisson", "negbin"}
        Quasi-Poisson is the Poisson fit with dispersion ``pearson_chi2 / df_resid``; "negbin" is NB2,
        ``Var(y) = mu + mu^2 / theta``, with dispersion 1.
    offset, weights : array (n,), optional
        Offset added to the linear predictor; prior frequency weights (a row with weight 2 is the
        same as two identical rows; ``n_obs`` is the weight total).
    start : array (p,), optional
        Starting coefficients (warm start). Default: start from ``mu = y + 0.1`` as R's ``glm`` does.
    theta : float, optional
        Known negative binomial shape. When None with family "negbin" it is estimated by alternating
        IRLS for the coefficients with a one-dimensional solve for theta until a round changes the
        variance function ``mu + mu^2/theta`` by at most ``100 * tol`` relative and the IRLS has converged:
        ``theta_method="ml"`` maximises the profile likelihood, ``"moments"`` solves
        ``sum((y - mu)^2 / (mu + mu^2/theta)) = n - p``. When the estimate is infinite (no
        over-dispersion: the score for ``1/theta`` at the Poisson fit is not positive, or for
        ``"moments"`` the Poisson Pearson chi-square is at most ``n - p``) the Poisson fit is returned with
        ``family="poisson"`` and a note in ``notes``.
    tol : float
        Convergence when ``|dev - dev_old| / (|dev| + 0.1) <= tol``.
    max_iter : int
        Maximum IRLS iterations (per theta round for an estimated theta).
    column_names : sequence of str, optional
        Used in error messages and stored on the result.
    response_name : str, optional
        Name of the counts (the outcome column) for error messages.
    strata : array (n,) of int, optional
        Stratum of each row: one free intercept per stratum, eliminated rather than estimated (conditional
        Poisson; Poisson and quasi-Poisson only). ``X`` must then have no constant column. The intercepts
        are profiled out at every evaluation and the information is formed on ``X`` demeaned by weighted
        stratum means (:mod:`airhealth.model.engine.strata`); ``df_resid`` is ``n - p - n_strata``.

    Returns
    -------
    GLMFit

    Raises
    ------
    FitError
        Non-finite input (naming the argument and first bad row), shape mismatch, no more rows than
        coefficients, a rank-deficient design (naming the collinear columns), every count zero (no finite
        estimates), or a quasi-Poisson fit that reproduces every count (zero dispersion).

    Warns
    -----
    ConvergenceWarning
        When the iteration limit is reached first, no step lowers the deviance, or theta does not settle;
        the message names the criterion that failed.

    References
    ----------
    McCullagh & Nelder (1989), section 2.5; Venables & Ripley (2002), *Modern Applied Statistics with S*,
    section 7.4 (negative binomial with estimated theta); Breslow (1984), *Applied Statistics* 33:38-44
    (moment estimator of theta).
    """
    validate_options(family, theta, theta_method, tol, max_iter)
    X, y, offset, w, names = validate_inputs(X, y, offset, weights, column_names)
    check_response(y, w, response_name)
    if start is not None:
        start = as_vector("start", start, X.shape[1], 0.0)
    strata = checked_strata(strata, X.shape, y, w, family)
    buf = workspace("design", X.shape, layout(X))
    try:
        fam, state, notes = _fit_family(
            X, y, w, offset, family, theta, start, theta_method, tol, max_iter, names, buf, strata
        )
    except FitError as err:
        better = collapsed_weights_error(err, X, y, w, response_name)
        if better is None:
            raise
        raise better from err
    theta_estimated = family == "negbin" and theta is None and not notes
    if notes:  # the likelihood is largest at the Poisson limit: the Poisson fit is reported
        family = "poisson"
    return summarise(
        coef=state.coef, eta=state.eta, mu=state.mu, info_chol=state.chol, y=y, w=w, offset=offset,
        fam=fam, family=family,
        n_iter=state.n_iter, converged=state.converged, n_halvings=state.n_halvings, names=names,
        has_intercept=intercept_column(X), theta_estimated=theta_estimated, notes=notes,
        response_name=response_name, strata=strata,
    )  # fmt: skip


def _fit_family(X, y, w, offset, family, theta, start, theta_method, tol, max_iter, names, buf, strata=None):
    """Run the IRLS for the family (alternating with theta when it is estimated): ``(family, state, notes)``."""
    if family != "negbin" or theta is not None:
        fam = Poisson() if family != "negbin" else NegativeBinomial(float(theta))
        state = _irls(X, y, w, offset, fam, start, tol, max_iter, names, buf, strata)
        _warn_if_not_converged(state, tol)
        return fam, state, ()
    return fit_theta(
        lambda fam, coef: _irls(X, y, w, offset, fam, coef, tol, max_iter, names, buf),
        y, w, float(w.sum()) - X.shape[1], start, theta_method, tol,
        warn=lambda state, what: _warn_if_not_converged(state, tol, what),
    )  # fmt: skip
