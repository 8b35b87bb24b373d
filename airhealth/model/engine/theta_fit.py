"""The negative binomial shape: alternating IRLS with a one-dimensional solve for ``theta``.

The engine (:mod:`airhealth.model.engine.irls`) hands over a callable running its IRLS for a given family and
starting coefficients; this module decides when ``theta`` has settled and when its estimate is infinite,
in which case the Poisson fit (the limit of the negative binomial as ``theta -> infinity``) is reported
with a note rather than chasing ``theta`` to a numerical bound.

References
----------
Venables WN, Ripley BD (2002). *Modern Applied Statistics with S*, 4th ed. Springer, section 7.4
(alternating estimation of the coefficients and ``theta``).
Dean C, Lawless JF (1989). Tests for detecting overdispersion in Poisson regression models. *J Am Stat
Assoc* 84:467-472 (the score for ``1/theta`` at the Poisson fit; from memory).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from ..._warn import warn_user
from ...errors import ConvergenceWarning
from .degenerate import poisson_boundary_note, theta_not_settled_message
from .families import NegativeBinomial, Poisson, theta_ml, theta_moments

__all__ = ["MAX_THETA_ROUNDS", "fit_theta", "variance_change"]

MAX_THETA_ROUNDS = 100


def variance_change(mu: np.ndarray, old: float, new: float) -> float:
    """Largest relative change of ``V(mu) = mu + mu^2/theta`` between two values of ``theta``.

    ``max_i mu_i |1/new - 1/old| / (1 + mu_i / max(old, new))``: the fit depends on ``theta`` only through
    the variance function, so this measures what a change of ``theta`` does to the fit (a change of 1e7 in
    a ``theta`` of 1e15 does nothing; one of 1e-7 in a ``theta`` of 2 does).
    """
    m = float(np.max(mu))
    return m * abs(1.0 / new - 1.0 / old) / (1.0 + m / max(old, new))


def fit_theta(
    irls: Callable[[Any, np.ndarray | None], Any],
    y: np.ndarray,
    w: np.ndarray,
    df_resid: float,
    start: np.ndarray | None,
    method: str,
    tol: float,
    warn: Callable[[Any, str], None],
) -> tuple[Any, Any, tuple[str, ...]]:
    """Alternate ``irls(family, start)`` and the ``theta`` solve until both converge.

    Starts from the Poisson fit. When the likelihood is largest at the Poisson limit
    (:func:`~airhealth.model.engine.degenerate.poisson_boundary_note`, checked at the Poisson fit and after every
    round) the Poisson fit is returned with that note. Otherwise ``theta`` has settled when a round changes
    the variance function by at most ``100 tol`` (:func:`variance_change`) and the IRLS has converged.
    ``warn(state, what)`` reports an unconverged IRLS. Returns ``(family, state, notes)``.
    """

    def estimate(mu: np.ndarray, previous: float | None) -> float:
        if method == "ml":
            return theta_ml(y, mu, w, start=previous)
        return theta_moments(y, mu, w, df_resid)

    state = irls(Poisson(), start)
    note = poisson_boundary_note(method, y, state.mu, w, df_resid) if state.converged else None
    if note is not None:
        return Poisson(), state, (note,)
    theta = estimate(state.mu, None)
    total_iter, halvings = state.n_iter, state.n_halvings
    settled, rounds, old, change = False, 0, theta, np.inf
    while rounds < MAX_THETA_ROUNDS and not settled:
        rounds += 1
        state = irls(NegativeBinomial(theta), state.coef)
        total_iter, halvings = total_iter + state.n_iter, halvings + state.n_halvings
        if state.converged and (note := poisson_boundary_note(method, y, state.mu, w, df_resid)) is not None:
            poisson = irls(Poisson(), state.coef)
            poisson.n_iter += total_iter
            warn(poisson, "IRLS")
            return Poisson(), poisson, (note,)
        old, theta = theta, estimate(state.mu, theta)
        change = variance_change(state.mu, old, theta)
        settled = change <= 100 * tol and state.converged
    fam = NegativeBinomial(theta)
    state = irls(fam, state.coef)
    state.n_iter += total_iter
    state.n_halvings += halvings
    if not state.converged:
        warn(state, "Negative binomial fit (IRLS at the final theta)")
    elif not settled:
        warn_user(theta_not_settled_message(rounds, old, theta, change, 100 * tol), ConvergenceWarning)
        state.converged = False
    return fam, state, ()
