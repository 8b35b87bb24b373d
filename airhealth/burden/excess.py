r"""Daily excess log-risk above a counterfactual: the rows ``R`` with ``R_t θ`` the log relative risk of day t.

For a linear single-day or moving-average model with per-unit coefficient :math:`\beta` on the model's
exposure :math:`z_t` (the exposure on the lag day, or the mean over the window):

.. math:: \log \mathrm{RR}_t = \beta \max(z_t - x_0, 0), \qquad R_t = \max(z_t - x_0, 0).

For distributed lags and non-linear exposure–responses (basis :math:`f`, lag basis :math:`C`, coefficients
:math:`\theta` ordered exposure basis outermost) the contributions are summed over lags
(Gasparrini & Leone 2014):

* backward perspective (default) — the cases of day t due to the exposures of the days before it:
  :math:`R_t = \sum_{l} \delta_{t-l}\,(f(x_{t-l}) - f(x_0)) \otimes C_{l\cdot}` with weight
  :math:`n_t`, the cases of day t;
* forward perspective — the future cases due to the exposure of day t:
  :math:`R_t = \delta_t\,(f(x_t) - f(x_0)) \otimes \sum_l C_{l\cdot}` with weight
  :math:`\bar n_t = \frac{1}{L - l_0 + 1}\sum_{l=l_0}^{L} n_{t+l}`, the mean cases over the lag window after t,

where :math:`\delta_s = 1` when :math:`x_s` is beyond the counterfactual (above it for ``side="above"``,
below it for ``side="below"``, any day for ``side="both"``) and 0 otherwise. With a linear response and
``side="above"`` each lag contributes :math:`\beta_l \max(x_{t-l} - x_0, 0)`.

A day whose exposure (on any lag day needed) or count is missing is left out, with its reason: it is never
counted as a day of zero excess.

References
----------
Gasparrini A, Leone M (2014). Attributable risk from distributed lag models. BMC Med Res Methodol 14:55.
Gasparrini A, Armstrong B, Kenward MG (2010). Distributed lag non-linear models. Stat Med 29:2224–2234.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
import pandas as pd

from ..model.bases.exposure_lag import ExposureLagBasis
from ..model.design import (
    EXPOSURE_IN_WINDOW,
    EXPOSURE_MISSING,
    LAG_BEFORE_START,
    OUTCOME_MISSING,
)
from ..prep.lags import lag_matrix

__all__ = [
    "DailyExcess",
    "Perspective",
    "Side",
    "exposure_reasons",
    "frame_rows",
    "lag_rows",
    "model_exposure_rows",
]

Perspective = Literal["backward", "forward"]
Side = Literal["above", "below", "both"]

# the reasons a day is left out are the fit's (model/design.py), plus those of the forward perspective
BEFORE_START = LAG_BEFORE_START
FUTURE_MISSING = "outcome missing in the following lag window"
AFTER_END = "lag window ends after the last day"


@dataclass(frozen=True)
class DailyExcess:
    """The days counted, their contrast rows and case weights, and the days left out with the reason."""

    dates: pd.DatetimeIndex
    rows: np.ndarray
    cases: np.ndarray
    left_out: pd.DataFrame  # columns date, reason

    @property
    def n_days(self) -> int:
        return len(self.dates)


def _beyond(x: np.ndarray, x0: float, side: Side) -> np.ndarray:
    if side == "above":
        return x > x0
    if side == "below":
        return x < x0
    return np.ones(x.shape, dtype=bool)


def _reasons(bad: np.ndarray, reason: str, at_edge: np.ndarray | None = None, edge_reason: str = "") -> np.ndarray:
    """Per day, ``reason`` where ``bad`` ('' elsewhere); ``edge_reason`` instead where also ``at_edge``."""
    reasons = np.full(len(bad), "", dtype=object)
    reasons[bad] = reason
    if at_edge is not None:
        reasons[bad & at_edge] = edge_reason
    return reasons


def exposure_reasons(x: np.ndarray, window: np.ndarray, lags: np.ndarray) -> np.ndarray:
    """Per day, why the exposure is unusable ('' when it is usable)."""
    early = np.arange(len(x)) < int(lags.max())
    missing = ~np.isfinite(window).all(axis=1)
    reasons = _reasons(missing, EXPOSURE_IN_WINDOW, early, BEFORE_START)
    if 0 in lags:
        reasons[missing & ~np.isfinite(x)] = EXPOSURE_MISSING
    return reasons


def frame_rows(
    dates: pd.DatetimeIndex,
    x: np.ndarray,
    y: np.ndarray,
    basis: ExposureLagBasis,
    x0: float,
    side: Side,
    perspective: Perspective,
) -> DailyExcess:
    """Rows for a daily series on a complete calendar: on the model's own exposure for a linear single-day or
    moving-average term in the backward perspective (its missing-day rule, e.g. ``min_count``, applies),
    else lag by lag (:func:`lag_rows`)."""
    if basis.response.is_linear and not basis.is_distributed and perspective == "backward":
        z = basis.lag.columns(np.asarray(x, dtype=float))[:, 0]
        lags = np.asarray(basis.lags, dtype=int)
        reasons = exposure_reasons(x, lag_matrix(x, lags), lags)
        reasons = np.where(np.isfinite(z), "", np.where(reasons == "", EXPOSURE_IN_WINDOW, reasons))
        return model_exposure_rows(dates, z, y, x0, side, reasons)
    return lag_rows(dates, x, y, basis, x0, side, perspective)


def _future_mean(y: np.ndarray, lags: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mean of ``y[t + l]`` over the lags and, per day, why it is unavailable."""
    ahead = lag_matrix(y[::-1], lags)[::-1]  # column j: y[t + lags[j]]
    late = np.arange(len(y)) > len(y) - 1 - int(lags.max())
    return ahead.mean(axis=1), _reasons(~np.isfinite(ahead).all(axis=1), FUTURE_MISSING, late, AFTER_END)


def _assemble(dates: pd.DatetimeIndex, rows: np.ndarray, cases: np.ndarray, reasons: np.ndarray) -> DailyExcess:
    keep = reasons == ""
    left = pd.DataFrame({"date": dates[~keep], "reason": reasons[~keep].astype(str)})
    return DailyExcess(dates[keep], np.ascontiguousarray(rows[keep]), cases[keep].astype(float), left)


def _outcome_reasons(y: np.ndarray) -> np.ndarray:
    return _reasons(~np.isfinite(y), OUTCOME_MISSING)


def model_exposure_rows(
    dates: pd.DatetimeIndex, z: np.ndarray, y: np.ndarray, x0: float, side: Side, reasons: np.ndarray
) -> DailyExcess:
    """Rows ``δ_t (z_t - x0)`` of a linear single-day or moving-average model (``z``: the model's exposure).

    ``reasons`` gives, per day, why its exposure is unusable ('' otherwise); the outcome is checked here.
    """
    z = np.asarray(z, dtype=float)
    diff = np.where(_beyond(z, x0, side), z - x0, 0.0)
    why = np.where(reasons == "", _outcome_reasons(y), reasons)
    return _assemble(dates, diff[:, None], np.asarray(y, dtype=float), why)


def lag_rows(
    dates: pd.DatetimeIndex,
    x: np.ndarray,
    y: np.ndarray,
    basis: ExposureLagBasis,
    x0: float,
    side: Side,
    perspective: Perspective,
) -> DailyExcess:
    """Rows of a distributed-lag or non-linear term on a complete calendar (see the module's formulas)."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    lags = np.asarray(basis.lags, dtype=int)
    c = basis.lag.basis()
    response = basis.response
    f0 = response.evaluate(np.array([float(x0)]))[0]
    if perspective == "backward":
        window = lag_matrix(x, lags)
        reasons = exposure_reasons(x, window, lags)
        filled = np.where(np.isfinite(window), window, x0)
        f = response.evaluate(filled.ravel()).reshape(*filled.shape, -1) - f0
        f = np.where(_beyond(filled, x0, side)[..., None], f, 0.0)
        rows = np.einsum("tlj,lk->tjk", f, c).reshape(len(x), -1)
        why = np.where(reasons == "", _outcome_reasons(y), reasons)
        return _assemble(dates, rows, y, why)
    reasons = _reasons(~np.isfinite(x), EXPOSURE_MISSING)
    filled = np.where(np.isfinite(x), x, x0)
    f = response.evaluate(filled) - f0
    f = np.where(_beyond(filled, x0, side)[:, None], f, 0.0)
    rows = np.einsum("tj,k->tjk", f, c.sum(axis=0)).reshape(len(x), -1)
    cases, future = _future_mean(y, lags)
    why = np.where(reasons == "", future, reasons)
    return _assemble(dates, rows, cases, why)
