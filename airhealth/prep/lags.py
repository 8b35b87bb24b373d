"""Lagged and moving-average exposures on a complete daily calendar.

All functions assume one row per consecutive day (see :func:`airhealth.prep.align.align_daily`), so that
"the value k rows earlier" is "the value k days earlier".
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import SpecificationError

__all__ = ["lag_matrix", "lagged", "moving_average"]


def _as_array(x: pd.Series | np.ndarray) -> np.ndarray:
    return np.asarray(x, dtype=float)


def lagged(x: pd.Series | np.ndarray, lag: int) -> np.ndarray:
    """Return ``x`` shifted forward by ``lag`` days: element t is x[t - lag]; the first ``lag`` are missing."""
    if lag < 0:
        raise SpecificationError(f"lag must be >= 0 days, got {lag}.")
    v = _as_array(x)
    out = np.full(v.shape, np.nan)
    if lag < len(v):
        out[lag:] = v[: len(v) - lag]
    return out


def lag_matrix(x: pd.Series | np.ndarray, lags: np.ndarray | range | list[int]) -> np.ndarray:
    """Return an ``n × len(lags)`` array whose column j is ``x`` lagged by ``lags[j]`` days."""
    lags = np.asarray(list(lags), dtype=int)
    if (lags < 0).any():
        raise SpecificationError(f"lags must be >= 0 days, got {lags.min()}.")
    v = _as_array(x)
    n = len(v)
    out = np.full((n, len(lags)), np.nan)
    for j, lag in enumerate(lags):
        if lag < n:
            out[lag:, j] = v[: n - lag]
    return out


def moving_average(x: pd.Series | np.ndarray, first: int, last: int, min_count: int | None = None) -> np.ndarray:
    """Mean of ``x`` over lags ``first..last`` (inclusive) for each day.

    By the usual convention the mean is missing when any day in the window is missing; with ``min_count``
    it is the mean of the available days when at least ``min_count`` of them are present.
    """
    if first < 0 or last < first:
        raise SpecificationError(f"a moving average needs 0 <= first <= last, got lags {first}-{last}.")
    width = last - first + 1
    if min_count is not None and not 1 <= min_count <= width:
        raise SpecificationError(f"min_count must be between 1 and {width} for lags {first}-{last}.")
    window = lag_matrix(x, range(first, last + 1))
    present = np.isfinite(window)
    count = present.sum(axis=1)
    total = np.where(present, window, 0.0).sum(axis=1)
    need = width if min_count is None else min_count
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(count >= need, total / np.maximum(count, 1), np.nan)
