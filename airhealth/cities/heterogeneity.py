r"""Between-city variance :math:`\tau^2` and the weighted least squares behind every univariate pooling.

The random-effects model for :math:`k` city estimates :math:`y_i` with within-city variances :math:`v_i` is

.. math:: y_i = x_i^\top\beta + u_i + e_i,\qquad u_i \sim N(0, \tau^2),\quad e_i \sim N(0, v_i),

with :math:`x_i` the intercept and any city-level moderators (:math:`p` columns). Given :math:`\tau^2`, the
estimate is weighted least squares with :math:`W = \mathrm{diag}\{1/(v_i + \tau^2)\}`:
:math:`\hat\beta = (X^\top W X)^{-1} X^\top W y`, :math:`\mathrm{Cov}(\hat\beta) = (X^\top W X)^{-1}`.
With :math:`P = W - W X (X^\top W X)^{-1} X^\top W`:

* Cochran's :math:`Q_E = y^\top P_0 y` with :math:`P_0` at :math:`\tau^2 = 0`, on :math:`k - p` df.
* DerSimonian–Laird: :math:`\hat\tau^2 = \max\{0, (Q_E - (k-p)) / \mathrm{tr}\,P_0\}`.
* REML: Fisher scoring :math:`\tau^2 \leftarrow \tau^2 + (y^\top P P y - \mathrm{tr}\,P) / \mathrm{tr}(P P)`,
  halving any step that would make :math:`\tau^2` negative; standard error
  :math:`\sqrt{2 / \mathrm{tr}(P P)}` from the Fisher information at the estimate.

References
----------
DerSimonian R, Laird N (1986). Meta-analysis in clinical trials. Control Clin Trials 7:177–188.
Viechtbauer W (2005). Bias and efficiency of meta-analytic variance estimators in the random-effects model.
J Educ Behav Stat 30:261–293.
Cochran WG (1954). The combination of estimates from different experiments. Biometrics 10:101–129.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import FitError

__all__ = ["WeightedFit", "cochran_q", "tau2_dl", "tau2_reml", "typical_within_variance", "weighted_fit"]

#: REML stops when a Fisher step changes tau² by less than this fraction of (tau² + mean within variance):
#: far below any reported digit, so the estimate is the optimum and not the point where iterations stopped.
REML_TOLERANCE = 1e-12
REML_MAX_ITER = 500
MAX_HALVINGS = 60


@dataclass(frozen=True)
class WeightedFit:
    r"""Weighted least squares at one value of tau², with the traces of :math:`P` and :math:`PP`.

    :math:`P` itself (k × k) is never formed, so memory stays linear in the number of cities:
    :math:`Py = W(y - X\hat\beta)`, :math:`\mathrm{tr}P = \sum w_i - \mathrm{tr}(C X^\top W^2 X)` and
    :math:`\mathrm{tr}PP = \sum w_i^2 - 2\,\mathrm{tr}(C X^\top W^3 X) + \mathrm{tr}\{(C X^\top W^2 X)^2\}`
    with :math:`C = (X^\top W X)^{-1}`.
    """

    coef: np.ndarray
    cov: np.ndarray
    projected: np.ndarray  # P y
    trace: float  # tr P
    trace_squared: float  # tr PP


def weighted_fit(y: np.ndarray, v: np.ndarray, X: np.ndarray, tau2: float) -> WeightedFit:
    """Weighted least squares with weights ``1 / (v + tau2)``."""
    w = 1.0 / (v + tau2)
    cov = np.linalg.inv(X.T @ (X * w[:, None]))
    cov = (cov + cov.T) / 2
    coef = cov @ (X.T @ (w * y))
    m2 = cov @ (X.T @ (X * (w**2)[:, None]))
    m3 = cov @ (X.T @ (X * (w**3)[:, None]))
    return WeightedFit(
        coef=coef,
        cov=cov,
        projected=w * (y - X @ coef),
        trace=float(w.sum() - np.trace(m2)),
        trace_squared=float((w**2).sum() - 2 * np.trace(m3) + np.trace(m2 @ m2)),
    )


def cochran_q(y: np.ndarray, v: np.ndarray, X: np.ndarray) -> float:
    r"""Cochran's Q (the residual heterogeneity statistic ``Q_E`` with moderators): :math:`y^\top P_0 y`."""
    fit = weighted_fit(y, v, X, 0.0)
    return float(fit.projected @ (y - X @ fit.coef))


def typical_within_variance(v: np.ndarray, X: np.ndarray) -> float:
    r""":math:`s^2 = (k - p) / \mathrm{tr}\,P_0`, the 'typical' within-city variance of Higgins & Thompson (2002)."""
    return (len(v) - X.shape[1]) / weighted_fit(np.zeros(len(v)), v, X, 0.0).trace


def tau2_dl(y: np.ndarray, v: np.ndarray, X: np.ndarray) -> float:
    """DerSimonian–Laird moment estimate of tau² (truncated at zero)."""
    q = cochran_q(y, v, X)
    return max(0.0, (q - (len(y) - X.shape[1])) / weighted_fit(y, v, X, 0.0).trace)


def tau2_reml(y: np.ndarray, v: np.ndarray, X: np.ndarray) -> tuple[float, float, int]:
    """REML estimate of tau² by Fisher scoring with step halving, its standard error and the iterations used.

    Starts from the DerSimonian–Laird estimate. Raises :class:`FitError` if the scoring does not converge.
    """
    tau2 = tau2_dl(y, v, X)
    scale = tau2 + float(np.mean(v))
    for iteration in range(1, REML_MAX_ITER + 1):
        fit = weighted_fit(y, v, X, tau2)
        step = (float(fit.projected @ fit.projected) - fit.trace) / fit.trace_squared
        halvings = 0
        while tau2 + step < 0 and halvings < MAX_HALVINGS:
            step /= 2
            halvings += 1
        if tau2 + step < 0:
            step = -tau2
        tau2 += step
        if abs(step) <= REML_TOLERANCE * scale:
            return tau2, float(np.sqrt(2.0 / weighted_fit(y, v, X, tau2).trace_squared)), iteration
    raise FitError(
        f"the REML estimate of the between-city variance did not converge in {REML_MAX_ITER} Fisher scoring steps "
        f"(last tau² {tau2:.4g}, last step {step:.3g}); use method='dl' or check the estimates for outliers."
    )
