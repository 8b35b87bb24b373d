"""Autocorrelation-robust (Newey–West) covariance of GLM coefficients, and the default truncation lag.

The estimate is the sandwich ``B M B`` with bread ``B = (Xᵀ W X)⁻¹`` (the unscaled model covariance) and
meat

.. math::

    M = \\sum_t s_t s_t^\\top + \\sum_{j=1}^{L} \\left(1 - \\frac{j}{L+1}\\right)
        \\sum_{t} \\left(s_t s_{t+j}^\\top + s_{t+j} s_t^\\top\\right),

where ``s_t = x_t w_t (y_t - μ_t) / μ_t`` is day ``t``'s contribution to the score of a log-link GLM
(``w_t`` the IRLS working weight; for (quasi-)Poisson ``s_t = x_t (y_t - μ_t)``) and the Bartlett weights
``1 - j/(L+1)`` keep ``M`` positive semi-definite (Newey & West 1987). No small-sample factor is applied
(as R ``sandwich::NeweyWest(..., adjust = FALSE)`` and statsmodels ``cov_type="HAC"`` with its default
``use_correction=False``). The dispersion cancels: the estimate is the same for Poisson and quasi-Poisson.

Gaps. Lags are counted on the calendar: a pair of days enters the ``j``-th term only when both were used
and they are exactly ``j`` calendar days apart, so a day before a gap is never paired with the day after
it as if they were neighbours. This equals the formula above applied to the score series on the full
calendar with zero scores on days not used. Without gaps it is the usual estimate on consecutive rows.

References
----------
Newey WK, West KD (1987). A simple, positive semi-definite, heteroskedasticity and autocorrelation
consistent covariance matrix. Econometrica 55:703–708.
Newey WK, West KD (1994). Automatic lag selection in covariance matrix estimation. Rev Econ Stud
61:631–653 (the rule of thumb ``floor(4 (n/100)^(2/9))`` for the Bartlett kernel).
Zeileis A (2004). Econometric computing with HC and HAC covariance matrix estimators. J Stat Softw 11(10).
"""

from __future__ import annotations

import numpy as np

from ...errors import SpecificationError
from .families import NegativeBinomial, Poisson

__all__ = ["default_hac_lags", "family_of", "fit_hac_covariance", "hac_covariance", "score_contributions"]


def family_of(name: str, theta: float | None) -> Poisson | NegativeBinomial:
    """The variance function of a fitted family: negative binomial with its θ, else Poisson."""
    return NegativeBinomial(float(theta)) if name == "negbin" and theta is not None else Poisson()


def default_hac_lags(n_days: int) -> int:
    """Truncation lag ``floor(4 (n/100)^(2/9))`` (Newey & West 1994 rule of thumb for the Bartlett kernel).

    About 6 for 3 years of daily data, 9 for 14 years.
    """
    return int(np.floor(4.0 * (n_days / 100.0) ** (2.0 / 9.0)))


def score_contributions(
    matrix: np.ndarray, response: np.ndarray, fitted: np.ndarray, working_weights: np.ndarray
) -> np.ndarray:
    """Per-day score contributions ``x_t w_t (y_t - μ_t) / μ_t`` of a log-link GLM (``n × p``)."""
    factor = working_weights * (response - fitted) / fitted
    return matrix * factor[:, None]


def hac_covariance(
    scores: np.ndarray, bread: np.ndarray, lags: int, day_numbers: np.ndarray | None = None
) -> np.ndarray:
    """Newey–West covariance ``B M B`` with Bartlett weights up to ``lags`` (see the module notes).

    Parameters
    ----------
    scores : ndarray, shape (n, p)
        Per-day score contributions (:func:`score_contributions`).
    bread : ndarray, shape (p, p)
        ``(Xᵀ W X)⁻¹``, the unscaled model covariance.
    lags : int
        Truncation lag ``L`` (0 gives the heteroskedasticity-robust sandwich).
    day_numbers : ndarray of int, optional
        Calendar position of each row (e.g. days since the first day); pairs are formed only between rows
        exactly ``j`` days apart. ``None``: rows are consecutive days.

    Raises
    ------
    SpecificationError
        When ``lags`` is negative or not shorter than the series.
    """
    n = scores.shape[0]
    if isinstance(lags, bool) or not isinstance(lags, int | np.integer) or lags < 0:
        raise SpecificationError(f"hac_lags must be a whole number >= 0, got {lags!r}.")
    if lags >= n:
        raise SpecificationError(
            f"hac_lags={lags} is not shorter than the series ({n} days used); choose hac_lags below {n} "
            f"(the default rule gives {default_hac_lags(n)})."
        )
    if day_numbers is None:
        full = scores
    else:
        day_numbers = np.asarray(day_numbers, dtype=np.int64)
        full = np.zeros((int(day_numbers[-1] - day_numbers[0]) + 1, scores.shape[1]))
        full[day_numbers - day_numbers[0]] = scores
    meat = full.T @ full
    for j in range(1, int(lags) + 1):
        cross = full[j:].T @ full[:-j]
        meat += (1.0 - j / (lags + 1.0)) * (cross + cross.T)
    cov = bread @ meat @ bread
    return (cov + cov.T) / 2.0


def fit_hac_covariance(
    matrix: np.ndarray,
    response: np.ndarray,
    fitted: np.ndarray,
    family: Poisson | NegativeBinomial,
    bread: np.ndarray,
    dates: np.ndarray,
    lags: int | None,
) -> tuple[np.ndarray, int]:
    """HAC covariance of a fit on the days ``dates`` (calendar-aware) and the truncation lag used.

    ``lags=None`` takes :func:`default_hac_lags` of the number of days used.
    """
    n = len(response)
    used_lags = default_hac_lags(n) if lags is None else int(lags)
    weights = family.working_weights(fitted, np.ones(n))
    scores = score_contributions(matrix, response, fitted, weights)
    day_numbers = (np.asarray(dates, dtype="datetime64[D]") - np.datetime64(dates[0], "D")).astype(np.int64)
    return hac_covariance(scores, bread, used_lags, day_numbers), used_lags
