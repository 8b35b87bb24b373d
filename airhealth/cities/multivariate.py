r"""Multivariate random-effects pooling of whole coefficient vectors: ``airhealth.pool_multivariate``.

Each city :math:`i = 1..k` gives a vector :math:`y_i` of :math:`p` coefficients (lags, or an exposure–response
basis) with within-city covariance :math:`S_i`. The model is

.. math:: y_i = \beta + b_i + e_i,\qquad b_i \sim N(0, \Sigma),\quad e_i \sim N(0, S_i),

with an unstructured between-city covariance :math:`\Sigma`. Given :math:`\Sigma`, with
:math:`V_i = S_i + \Sigma` and :math:`A = \sum_i V_i^{-1}`, the pooled vector is
:math:`\hat\beta = A^{-1}\sum_i V_i^{-1} y_i` with covariance :math:`A^{-1}`.

* ``"reml"``: :math:`\Sigma = L L^\top` with :math:`L` lower triangular (so :math:`\Sigma` stays positive
  semi-definite) maximising the restricted log-likelihood
  :math:`-\tfrac12\sum_i \log|V_i| - \tfrac12\log|A| - \tfrac12\sum_i r_i^\top V_i^{-1} r_i`,
  :math:`r_i = y_i - \hat\beta`, by quasi-Newton (scipy BFGS) with its analytic gradient
  :math:`\partial\ell/\partial\Sigma = \tfrac12\sum_i (V_i^{-1} r_i r_i^\top V_i^{-1} - V_i^{-1}
  + V_i^{-1} A^{-1} V_i^{-1})`, started from the method-of-moments estimate. Each coefficient is first
  scaled by the root mean within-city variance (the optimum is equivariant), so the tolerances mean the same
  for coefficients per µg/m³ and per 10 µg/m³.
* ``"mm"``: the matrix method of moments of Jackson, White & Riley (2013), here without city-level
  covariates. With :math:`W_i = S_i^{-1}`, :math:`A_0 = \sum_i W_i`, the fixed-effect
  :math:`\hat\beta_0 = A_0^{-1}\sum_i W_i y_i` and :math:`Q = \sum_i W_i (y_i - \hat\beta_0)(y_i -
  \hat\beta_0)^\top`, one has :math:`E[Q] = (k-1) I + (A_0 - \sum_i W_i A_0^{-1} W_i)\Sigma`; solving for
  :math:`\Sigma`, symmetrising and setting negative eigenvalues to zero gives the estimate. With
  :math:`p = 1` it is the DerSimonian–Laird estimator.

Cochran's :math:`Q = \sum_i (y_i - \hat\beta_0)^\top W_i (y_i - \hat\beta_0)` tests homogeneity on
:math:`p(k-1)` df. City predictions (BLUPs): :math:`\tilde\theta_i = \hat\beta + \Sigma V_i^{-1}(y_i - \hat\beta)`
with covariance :math:`\Sigma V_i^{-1} S_i + (I - \Sigma V_i^{-1}) A^{-1} (I - \Sigma V_i^{-1})^\top`
(with :math:`p = 1`, the univariate formula of :mod:`airhealth.cities.pooled_result`).

References
----------
Jackson D, White IR, Riley RD (2013). A matrix-based method of moments for fitting the multivariate random
effects model for meta-analysis and meta-regression. Biom J 55:231–245.
Harville DA (1977). Maximum likelihood approaches to variance component estimation and to related problems.
J Am Stat Assoc 72:320–338 (restricted likelihood).
Jackson D, Riley R, White IR (2011). Multivariate meta-analysis: potential and promise. Stat Med
30:2481–2498.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any, Literal

import numpy as np
from scipy import optimize, stats

from .._choices import check_choice
from ..errors import FitError
from ._inputs import check_covariances, check_vectors
from .multivariate_result import MultivariatePooled
from .pooling import pooled_lag_unit

__all__ = ["MultivariateMethod", "MultivariatePooled", "pool_multivariate"]

MultivariateMethod = Literal["reml", "mm"]

#: REML is accepted when the gradient with respect to Σ (scaled units, per city) is below this (see _is_reml_optimum).
GRADIENT_TOLERANCE = 1e-6
#: Eigenvalues of Σ below this (in units of the mean within-city variance) count as zero: on the boundary.
NULL_EIGENVALUE = 1e-6


def pool_multivariate(
    coefs: Any, covs: Any, method: MultivariateMethod = "reml", cities: Sequence[Any] | None = None
) -> MultivariatePooled:
    """Pool vectors of city coefficients with their within-city covariances (multivariate random effects).

    Parameters
    ----------
    coefs : array-like (k, p) or DataFrame
        One row per city (a DataFrame's index labels the cities, its columns name the coefficients).
    covs : sequence of k arrays (p, p), array (k, p, p) or dict
        Within-city covariances of the vectors, in the same city order.
    method : {"reml", "mm"}
        Restricted maximum likelihood, or the method of moments of Jackson, White & Riley (2013).
    cities : sequence of str, optional
        The cities' names, in the order of ``coefs`` (default: a DataFrame's index labels, else ``city 0``,
        ``city 1``, ...); results and error messages name the cities by them.

    Returns
    -------
    MultivariatePooled
        ``coef`` (pooled vector), ``cov`` (its covariance), ``between_cov``, the Q test, ``blup()``.

    Examples
    --------
    >>> import numpy as np, airhealth
    >>> coefs = [[0.1, 0.2], [0.3, 0.1], [0.2, 0.4], [0.0, 0.3]]
    >>> covs = [np.diag([0.01, 0.02])] * 4
    >>> airhealth.pool_multivariate(coefs, covs, method="mm").coef.round(4)
    array([0.15, 0.25])
    """
    check_choice("method", method, MultivariateMethod)
    y, labels, names = check_vectors(coefs, cities)
    k, p = y.shape
    S = check_covariances(covs, k, p, labels)
    scale = np.sqrt(np.mean(np.diagonal(S, axis1=1, axis2=2), axis=0))
    ys, Ss = y / scale, S / np.outer(scale, scale)
    sigma = moments_between_cov(ys, Ss)
    iterations = 0
    if method == "reml":
        sigma, iterations = reml_between_cov(ys, Ss, start=sigma)
    between = sigma * np.outer(scale, scale)
    return MultivariatePooled.build(
        method=method, names=names, labels=labels, estimates=y, within=S, between_cov=between, iterations=iterations,
        **pooled_lag_unit(coefs),
    )  # fmt: skip


def _fixed_effect(y: np.ndarray, S: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    W = np.linalg.inv(S)
    A = W.sum(axis=0)
    beta = np.linalg.solve(A, np.einsum("ijk,ik->j", W, y))
    return W, A, beta


def moments_between_cov(y: np.ndarray, S: np.ndarray) -> np.ndarray:
    """Jackson–White–Riley (2013) method-of-moments estimate of Σ (no city-level covariates)."""
    k, p = y.shape
    W, A, beta = _fixed_effect(y, S)
    r = y - beta
    Q = np.einsum("ijk,ik,il->jl", W, r, r)
    B = A - np.einsum("ijk,kl,ilm->jm", W, np.linalg.inv(A), W)
    raw = np.linalg.solve(B, Q - (k - 1) * np.eye(p))
    sym = (raw + raw.T) / 2
    values, vectors = np.linalg.eigh(sym)
    return (vectors * np.clip(values, 0, None)) @ vectors.T


def _reml_parts(y: np.ndarray, S: np.ndarray, sigma: np.ndarray) -> tuple[float, np.ndarray]:
    """Negative restricted log-likelihood and its gradient with respect to Σ."""
    Vinv = np.linalg.inv(S + sigma)
    A = Vinv.sum(axis=0)
    Ainv = np.linalg.inv(A)
    beta = Ainv @ np.einsum("ijk,ik->j", Vinv, y)
    r = y - beta
    Vr = np.einsum("ijk,ik->ij", Vinv, r)
    logdet_v = np.linalg.slogdet(S + sigma)[1].sum()
    value = 0.5 * (logdet_v + np.linalg.slogdet(A)[1] + np.einsum("ij,ij->", r, Vr))
    grad = 0.5 * (np.einsum("ij,ik->jk", Vr, Vr) - A + np.einsum("ijk,kl,ilm->jm", Vinv, Ainv, Vinv))
    return float(value), -grad


def reml_between_cov(y: np.ndarray, S: np.ndarray, start: np.ndarray) -> tuple[np.ndarray, int]:
    """REML estimate of Σ over its Cholesky factor; raises :class:`FitError` if the optimum is not reached."""
    p = y.shape[1]
    rows, cols = np.tril_indices(p)
    L0 = np.linalg.cholesky(start + 0.05 * np.eye(p))  # away from Σ = 0, where the gradient in L vanishes

    def objective(theta: np.ndarray) -> tuple[float, np.ndarray]:
        L = np.zeros((p, p))
        L[rows, cols] = theta
        value, grad_sigma = _reml_parts(y, S, L @ L.T)
        return value, (2 * grad_sigma @ L)[rows, cols]

    result = optimize.minimize(
        objective, L0[rows, cols], jac=True, method="BFGS", options={"gtol": 1e-10, "maxiter": 2000}
    )
    L = np.zeros((p, p))
    L[rows, cols] = result.x
    sigma = L @ L.T
    if not np.isfinite(result.fun) or not _is_reml_optimum(y, S, sigma):
        raise FitError(
            f"the REML estimate of the between-city covariance did not converge ({result.message}); "
            "use method='mm' or check the city vectors and covariances for outliers."
        )
    return sigma, int(result.nit)


def _is_reml_optimum(y: np.ndarray, S: np.ndarray, sigma: np.ndarray) -> bool:
    """Optimality over positive semi-definite Σ (scaled units): zero gradient along the range of Σ, and no
    descent direction out of its null space (the gradient of the objective restricted there is PSD)."""
    _, grad = _reml_parts(y, S, sigma)
    tolerance = GRADIENT_TOLERANCE * len(y)  # the gradient is a sum over cities
    values, vectors = np.linalg.eigh(sigma)
    active = values > NULL_EIGENVALUE
    span, null = vectors[:, active], vectors[:, ~active]
    if span.size and np.abs(span.T @ grad @ span).max() > tolerance:
        return False
    return not (null.size and np.linalg.eigvalsh(null.T @ grad @ null).min() < -tolerance)


def q_test(y: np.ndarray, S: np.ndarray) -> tuple[float, int, float]:
    """Cochran's Q for homogeneity of the vectors: value, df = p(k-1), p-value."""
    k, p = y.shape
    W, _, beta = _fixed_effect(y, S)
    r = y - beta
    q = float(np.einsum("ij,ijk,ik->", r, W, r))
    df = p * (k - 1)
    return q, df, float(stats.chi2.sf(q, df))
