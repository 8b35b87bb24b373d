"""Count-data families with a log link: variance, deviance, working weights, log-likelihood.

Each family object states only its mathematics; the fitting loop lives in :mod:`airhealth.model.engine.irls`.
All functions take prior (frequency) weights ``w`` so a row with weight 2 counts as two identical rows.

With the log link ``eta = log(mu)`` we have ``dmu/deta = mu``, so the IRLS working weight of a row is
``w * mu**2 / V(mu)`` and the log-likelihood score is ``X.T @ (w * (y - mu) * mu / V(mu))``.

References
----------
McCullagh P, Nelder JA (1989). *Generalized Linear Models*, 2nd ed. Chapman & Hall. Chapters 2 and 6
(IRLS, deviance, Pearson statistic) and section 11.3 (the negative binomial).

Lawless JF (1987). Negative binomial and mixed Poisson regression. *Canadian Journal of Statistics*
15:209-225 (NB2 log-likelihood and its derivatives in the shape parameter).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import optimize, special

from ...errors import FitError

__all__ = ["NegativeBinomial", "Poisson", "overdispersion_score", "theta_ml", "theta_moments"]

#: Bounds on the negative binomial shape ``theta``: below, the fit is degenerate; above, it is Poisson.
THETA_MIN = 1e-8
THETA_MAX = 1e10


@dataclass(frozen=True)
class Poisson:
    """Poisson family, ``Var(y) = mu`` (also the mean model of quasi-Poisson)."""

    name: str = "poisson"

    def variance(self, mu: np.ndarray) -> np.ndarray:
        """Variance function ``V(mu) = mu``."""
        return mu

    def working_weights(self, mu: np.ndarray, w: np.ndarray) -> np.ndarray:
        """IRLS weights under the log link: ``w * mu``."""
        return w * mu

    def score_residuals(self, y: np.ndarray, mu: np.ndarray, w: np.ndarray) -> np.ndarray:
        """Per-row factor of the score ``X.T @ r``: ``w * (y - mu)``."""
        return w * (y - mu)

    def unit_deviance(self, y: np.ndarray, mu: np.ndarray) -> np.ndarray:
        """``2 * (y log(y/mu) - (y - mu))``, with ``0 log 0 = 0``."""
        return 2.0 * (special.xlogy(y, y) - special.xlogy(y, mu) - (y - mu))

    def deviance(self, y: np.ndarray, mu: np.ndarray, w: np.ndarray) -> float:
        """Weighted sum of unit deviances."""
        return float(w @ self.unit_deviance(y, mu))

    def pearson_chi2(self, y: np.ndarray, mu: np.ndarray, w: np.ndarray) -> float:
        """``sum(w (y - mu)^2 / V(mu))``."""
        return float(w @ ((y - mu) ** 2 / self.variance(mu)))

    def loglik(self, y: np.ndarray, mu: np.ndarray, w: np.ndarray) -> float:
        """Full log-likelihood ``sum(w (y log mu - mu - log y!))``."""
        return float(w @ (special.xlogy(y, mu) - mu - special.gammaln(y + 1.0)))


@dataclass(frozen=True)
class NegativeBinomial:
    """Negative binomial (NB2) family with known shape ``theta``: ``Var(y) = mu + mu^2 / theta``."""

    theta: float
    name: str = "negbin"

    def variance(self, mu: np.ndarray) -> np.ndarray:
        """Variance function ``mu + mu^2 / theta``."""
        return mu + mu * mu / self.theta

    def working_weights(self, mu: np.ndarray, w: np.ndarray) -> np.ndarray:
        """IRLS weights under the log link: ``w * mu / (1 + mu / theta)``."""
        return w * mu / (1.0 + mu / self.theta)

    def score_residuals(self, y: np.ndarray, mu: np.ndarray, w: np.ndarray) -> np.ndarray:
        """Per-row factor of the score: ``w * (y - mu) / (1 + mu / theta)``."""
        return w * (y - mu) / (1.0 + mu / self.theta)

    def unit_deviance(self, y: np.ndarray, mu: np.ndarray) -> np.ndarray:
        """``2 * (y log(y/mu) - (y + theta) log((y + theta)/(mu + theta)))``."""
        # log((y + t)/(mu + t)) as log1p((y - mu)/(mu + t)): accurate when theta is far larger than the counts
        t = self.theta
        return 2.0 * (special.xlogy(y, y) - special.xlogy(y, mu) - (y + t) * np.log1p((y - mu) / (mu + t)))

    def deviance(self, y: np.ndarray, mu: np.ndarray, w: np.ndarray) -> float:
        """Weighted sum of unit deviances."""
        return float(w @ self.unit_deviance(y, mu))

    def pearson_chi2(self, y: np.ndarray, mu: np.ndarray, w: np.ndarray) -> float:
        """``sum(w (y - mu)^2 / V(mu))``."""
        return float(w @ ((y - mu) ** 2 / self.variance(mu)))

    def loglik(self, y: np.ndarray, mu: np.ndarray, w: np.ndarray) -> float:
        """Full NB2 log-likelihood (Lawless 1987, eq. 2.3) with frequency weights.

        Written so that it stays accurate when ``theta`` is many orders of magnitude above the counts
        (where ``gammaln(y + theta) - gammaln(theta)`` loses every digit): with ``x = mu / theta``,
        ``log L = [log G(y + t) - log G(t) - y log t] - log y! - t log1p(x) + y log mu - y log1p(x)``,
        the bracket summed exactly for whole counts (:func:`_log_rising`).
        """
        t = self.theta
        x = mu / t
        ll = _log_rising(y, t) - special.gammaln(y + 1.0) - t * np.log1p(x) + special.xlogy(y, mu) - y * np.log1p(x)
        return float(w @ ll)


#: Whole counts up to this size use the exact finite sums below; larger or fractional counts use the
#: gamma-function forms (accurate unless theta is far above the counts).
_MAX_TABLE = 100_000


def _whole_counts(y: np.ndarray) -> bool:
    return bool(y.size) and float(y.max()) <= _MAX_TABLE and bool(np.all(y == np.floor(y)))


def _table(terms: np.ndarray, y: np.ndarray) -> np.ndarray:
    """``sum(terms[k] for k < y)`` per row, from one cumulative sum over ``k = 0 .. max(y) - 1``."""
    return np.concatenate(([0.0], np.cumsum(terms)))[y.astype(np.int64)]


def _log_rising(y: np.ndarray, t: float) -> np.ndarray:
    """``log G(y + t) - log G(t) - y log t`` (``= sum_{k<y} log1p(k/t)`` for whole ``y``)."""
    if _whole_counts(y):
        k = np.arange(int(y.max()))
        return _table(np.log1p(k / t), y)
    return special.gammaln(y + t) - special.gammaln(t) - y * np.log(t)


def _x_minus_log1p(x: np.ndarray) -> np.ndarray:
    """``x - log1p(x)`` without cancellation for small ``x`` (its Taylor series below 0.01)."""
    x = np.asarray(x, dtype=float)
    small = np.abs(x) < 0.01
    out = x - np.log1p(x)
    xs = x[small]
    series = np.zeros_like(xs)
    for j in range(11, 1, -1):  # sum_{j=2}^{11} (-1)^j x^j / j, Horner form; error below x^12
        series = xs * ((-1.0) ** j / j + series)
    out[small] = xs * series
    return out


def overdispersion_score(y: np.ndarray, mu: np.ndarray, w: np.ndarray) -> float:
    """Score of the NB2 log-likelihood in ``alpha = 1/theta`` at ``alpha = 0`` (the Poisson fit).

    ``dl/dalpha |_{alpha=0} = sum(w ((y - mu)^2 - y)) / 2``. At the Poisson maximum-likelihood means the
    coefficients' score is zero, so this is also the slope of the profile likelihood in ``alpha`` at the
    Poisson boundary: when it is not positive the likelihood does not increase away from Poisson and the
    maximum-likelihood ``theta`` is infinite.

    References
    ----------
    Dean C, Lawless JF (1989). Tests for detecting overdispersion in Poisson regression models. *J Am
    Stat Assoc* 84:467-472 (the score statistic; from memory). Cameron AC, Trivedi PK (1990).
    Regression-based tests for overdispersion in the Poisson model. *J Econometrics* 46:347-364 (from
    memory). The formula itself is checked against a numerical derivative in tests/test_negbin_boundary.py.
    """
    return float(w @ ((y - mu) ** 2 - y)) / 2.0


def _theta_score(log_theta: float, y: np.ndarray, mu: np.ndarray, w: np.ndarray) -> tuple[float, float]:
    """Derivative of the NB2 log-likelihood in ``log(theta)`` and its second derivative.

    For whole counts the derivatives in ``t = theta`` are written without cancellation (each piece is
    accurate to rounding however large ``t`` is; the plain digamma form loses every digit above
    ``t ~ 1e7``): with ``x = mu / t``,

    ``dl/dt = (x - log1p(x)) - (1/t) sum_{k<y} k/(t+k) - mu (mu - y) / (t (t + mu))``,
    ``d2l/dt2 = sum_{k<y} k (2t + k) / (t^2 (t+k)^2) + mu (mu (t - y) - 2 y t) / (t^2 (t + mu)^2)``,

    which follow from ``psi(y+t) - psi(t) = sum_{k<y} 1/(t+k)`` and ``psi'(y+t) - psi'(t) =
    -sum_{k<y} 1/(t+k)^2`` (the recurrences of the digamma and trigamma functions).
    """
    t = float(np.exp(log_theta))
    tm = t + mu
    if _whole_counts(y):
        k = np.arange(int(y.max()))
        d1 = w @ (_x_minus_log1p(mu / t) - _table(k / (t + k), y) / t - mu * (mu - y) / (t * tm))
        d2 = w @ (_table(k * (2 * t + k) / (t + k) ** 2, y) / t**2 + mu * (mu * (t - y) - 2 * y * t) / (t * tm) ** 2)
    else:
        d1 = w @ (special.digamma(y + t) - special.digamma(t) + np.log(t) + 1.0 - np.log(tm) - (y + t) / tm)
        d2 = w @ (special.polygamma(1, y + t) - special.polygamma(1, t) + 1.0 / t - 2.0 / tm + (y + t) / tm**2)
    # chain rule for u = log(theta): dl/du = t dl/dt, d2l/du2 = t dl/dt + t^2 d2l/dt2
    return float(t * d1), float(t * d1 + t * t * d2)


def theta_ml(y: np.ndarray, mu: np.ndarray, w: np.ndarray, start: float | None = None, tol: float = 1e-12) -> float:
    """Maximum-likelihood NB2 shape ``theta`` for fixed means ``mu``.

    Newton's method on ``log(theta)`` started from the moment estimate ``n / sum(w (y/mu - 1)^2)``
    (as in Venables & Ripley 2002, section 7.4), with a bracketing root search as a fallback.

    Returns ``THETA_MAX`` when the likelihood still increases there (no over-dispersion).

    References
    ----------
    Venables WN, Ripley BD (2002). *Modern Applied Statistics with S*, 4th ed. Springer, section 7.4.
    """
    n = float(w.sum())
    if start is None:
        spread = float(w @ ((y / mu - 1.0) ** 2))
        start = n / spread if spread > 0 else THETA_MAX
    u = float(np.log(np.clip(start, THETA_MIN, THETA_MAX)))
    lo, hi = np.log(THETA_MIN), np.log(THETA_MAX)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        for _ in range(100):
            g, h = _theta_score(u, y, mu, w)
            if not (np.isfinite(g) and np.isfinite(h)) or h >= 0:
                break
            step = float(np.clip(-g / h, -5.0, 5.0))
            u = float(np.clip(u + step, lo, hi))
            if abs(step) <= tol:
                return float(np.exp(u))
    return _theta_bracketed(lambda v: _theta_score(v, y, mu, w)[0], lo, hi)


def _theta_bracketed(score, lo: float, hi: float) -> float:
    """Root of a decreasing-at-the-root function of ``log(theta)`` on ``[lo, hi]``, clamped to the ends."""
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        if score(hi) > 0:
            return THETA_MAX
        if score(lo) < 0:
            return THETA_MIN
        return float(np.exp(optimize.brentq(score, lo, hi, xtol=1e-14, rtol=4 * np.finfo(float).eps)))


def theta_moments(y: np.ndarray, mu: np.ndarray, w: np.ndarray, df_resid: float) -> float:
    """Method-of-moments NB2 shape: solves ``sum(w (y - mu)^2 / (mu + mu^2/theta)) = df_resid``.

    The left side increases with ``theta``; when even the Poisson limit gives less than ``df_resid``
    there is no over-dispersion and ``THETA_MAX`` is returned.

    References
    ----------
    Breslow NE (1984). Extra-Poisson variation in log-linear models. *Applied Statistics* 33:38-44.
    """
    if df_resid <= 0:
        raise FitError("The moment estimate of theta needs more rows than coefficients.")
    r2 = (y - mu) ** 2

    def excess(log_theta: float) -> float:
        t = np.exp(log_theta)
        return float(w @ (r2 / (mu + mu * mu / t))) - df_resid

    # excess increases with theta, so negate it for the bracketed solver's convention
    return _theta_bracketed(lambda v: -excess(v), np.log(THETA_MIN), np.log(THETA_MAX))
