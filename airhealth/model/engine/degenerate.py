"""What the GLM engine refuses and what it says about how a fit ended.

* Responses with no finite maximum-likelihood estimate (every count zero) raise
  :class:`~airhealth.errors.FitError` before any iteration.
* A quasi-Poisson fit that reproduces every count exactly has no estimable dispersion (its standard
  errors and QAIC would be 0 and ~1e33); that raises too.
* A negative binomial whose likelihood is largest at the Poisson limit (``theta -> infinity``) is
  reported as the Poisson fit, with a note saying why (:func:`poisson_boundary_note`).
* Non-convergence messages name only the criteria that actually failed (:func:`not_converged_message`).

This module knows nothing of data frames; the front end passes the outcome's name for the messages.

References
----------
Dean C, Lawless JF (1989). Tests for detecting overdispersion in Poisson regression models. *J Am Stat
Assoc* 84:467-472 (the score for ``1/theta`` at the Poisson fit; from memory, formula checked numerically
in tests/test_negbin_boundary.py).
Breslow NE (1984). Extra-Poisson variation in log-linear models. *Applied Statistics* 33:38-44 (the moment
equation for ``theta``).
"""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy.linalg import qr

from ...errors import FitError
from .checks import RANK_TOL
from .families import overdispersion_score

__all__ = [
    "PERFECT_FIT_DISPERSION",
    "check_dispersion",
    "check_response",
    "collapsed_weights_error",
    "not_converged_message",
    "poisson_boundary_note",
    "theta_not_settled_message",
]

#: A quasi-Poisson dispersion (Pearson chi2 / residual df) below this means the model reproduces the
#: counts to within 1e-4 of a Poisson standard deviation on every day: for daily counts that only happens
#: when they are constant or an exact function of the design (a numerical threshold; common practice, no
#: source). Real daily counts give dispersions of about 0.5-10.
PERFECT_FIT_DISPERSION = 1e-8


def _label(name: str | None) -> str:
    return f"the outcome {name!r}" if name else "y"


def check_response(y: np.ndarray, w: np.ndarray, name: str | None = None) -> None:
    """Raise :class:`FitError` when every count with positive weight is zero (no finite estimates)."""
    used = w > 0
    if np.any(y[used] > 0):
        return
    raise FitError(
        f"{_label(name)} is zero on all {int(used.sum())} days used (no events): a log-linear model has no "
        "finite estimates (the fitted means run to zero and the intercept to minus infinity). Check that the "
        "right outcome column and period were chosen."
    )


def check_dispersion(family: str, pearson_chi2: float, df_resid: float, name: str | None = None) -> None:
    """Raise :class:`FitError` when a quasi-Poisson fit reproduces every count (zero dispersion)."""
    if family != "quasipoisson":
        return
    dispersion = pearson_chi2 / df_resid
    if np.isfinite(dispersion) and dispersion >= PERFECT_FIT_DISPERSION:
        return
    raise FitError(
        f"the model reproduces {_label(name)} exactly on every day used (Pearson chi-square {pearson_chi2:.3g} "
        f"on {df_resid:g} residual df, dispersion {dispersion:.3g}): the quasi-Poisson dispersion cannot be "
        "estimated, so standard errors and QAIC would be meaningless. This happens when the counts are "
        "constant or an exact function of the model's columns; check the outcome column."
    )


def collapsed_weights_error(
    err: FitError, X: np.ndarray, y: np.ndarray, w: np.ndarray, name: str | None = None
) -> FitError | None:
    """A clearer error when the IRLS weights, not the design, made the information matrix singular.

    With very few events the fitted means fall to (numerically) zero on most days; the working weights
    ``w mu`` vanish there and the weighted design loses rank although the design itself is fine. Returns
    None (keep ``err``) unless ``err`` is a rank-deficiency error and ``sqrt(w) X`` has full rank.
    """
    if not str(err).startswith("The design matrix is rank-deficient"):
        return None
    M = X * np.sqrt(w)[:, None]
    norms = np.sqrt(np.einsum("ij,ij->j", M, M))
    if np.any(norms == 0):
        return None
    d = np.abs(np.diag(qr(M / norms, mode="r", pivoting=True, check_finite=False)[0]))
    if d.min() <= np.sqrt(RANK_TOL) * d[0]:
        return None
    used = w > 0
    return FitError(
        f"{_label(name)} has {float(w @ y):g} event(s) on {int(np.count_nonzero(y[used]))} of the "
        f"{int(used.sum())} days used: the fitted means fall to zero on the other days, so the counts carry no "
        f"information on some of the {X.shape[1]} coefficients (the design itself is not collinear). There are "
        "too few events for this model: use fewer terms or a longer period."
    )


def poisson_boundary_note(method: str, y: np.ndarray, mu: np.ndarray, w: np.ndarray, df_resid: float) -> str | None:
    """The note for a negative binomial whose ``theta`` estimate is infinite at the Poisson fit, else None.

    ``method="ml"``: the score for ``alpha = 1/theta`` at ``alpha = 0``, ``sum(w ((y - mu)^2 - y)) / 2``
    (Dean & Lawless 1989), is not positive at the Poisson means, so the likelihood does not increase away
    from the Poisson boundary. ``method="moments"``: the Poisson fit's Pearson chi-square does not exceed
    the residual df, so the moment equation (Breslow 1984) has no finite root.
    """
    if method == "ml":
        score = overdispersion_score(y, mu, w)
        if score > 0:
            return None
        detail = (
            f"the score for 1/theta at the Poisson fit, sum((y - mu)^2 - y)/2, is {score:.4g} <= 0, so the "
            "likelihood is largest at the Poisson limit (theta -> infinity)"
        )
    else:
        chi2 = float(w @ ((y - mu) ** 2 / mu))
        if chi2 > df_resid:
            return None
        detail = (
            f"the Poisson fit's Pearson chi-square ({chi2:.4g}) does not exceed the residual df ({df_resid:g}), "
            "so the moment equation for theta has no finite solution (theta -> infinity)"
        )
    return (
        f"negative binomial fitted as Poisson: the counts show no over-dispersion ({detail}); the Poisson "
        "fit is its limit and is reported (family 'poisson')."
    )


def not_converged_message(s: Any, tol: float, what: str, max_halvings: int) -> str:
    """Why an IRLS run (an ``engine._State``) stopped unconverged, naming only the criteria that failed."""
    if s.stalled:
        why = (
            f"no step along the Newton direction lowered the deviance ({s.deviance:.10g}) after {max_halvings} halvings"
        )
    else:
        failed = []
        if not s.last_change <= tol:
            failed.append(f"the last relative deviance change was {s.last_change:.3g} > tol={tol:g}")
        if not s.decrement <= tol * tol:
            failed.append(
                f"the predicted further decrease of the deviance was {s.decrement:.3g} of it > tol²={tol * tol:g}"
            )
        why = "the iteration limit was reached" + (" and " + " and ".join(failed) if failed else "")
    return (
        f"{what} stopped after {s.n_iter} iteration(s) without convergence: {why}. Increase max_iter, give "
        "better starting values or simplify the model; results may be inaccurate."
    )


def theta_not_settled_message(rounds: int, old: float, new: float, change: float, limit: float) -> str:
    """Why the alternation between IRLS and the theta solve stopped before theta settled."""
    return (
        f"Negative binomial fit stopped after {rounds} rounds of IRLS alternating with the theta estimate "
        f"without theta settling: the last round moved theta from {old:.6g} to {new:.6g}, changing the "
        f"variance function by up to {change:.3g} (relative) > {limit:g}. Results may be inaccurate; try "
        "theta_method='moments', a fixed theta, or family='quasipoisson'."
    )
