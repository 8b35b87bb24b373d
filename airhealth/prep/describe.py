"""Descriptive statistics of a daily time series: the "Table 1" of a time-series paper, and correlations.

Percentiles use linear interpolation between order statistics (numpy's default, the same as R's default
``quantile(type = 7)``; Hyndman & Fan 1996). The standard deviation uses the ``n - 1`` divisor. Correlations
use all pairs of days on which both variables are present (pairwise deletion), with the number of pairs
available from :func:`pair_counts`.

References
----------
.. [1] Hyndman RJ, Fan Y (1996). Sample quantiles in statistical packages. Am Stat 50:361–365.
.. [2] Bhaskaran K, Gasparrini A, Hajat S, Smeeth L, Armstrong B (2013). Time series regression studies in
   environmental epidemiology. Int J Epidemiol 42:1187–1195 (descriptive table and exposure correlations as
   the first look at the data).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Literal

import numpy as np
import pandas as pd

from .._choices import check_choice
from ..errors import DataError

__all__ = ["CorrelationMethod", "correlation_matrix", "pair_counts", "table_one"]

CorrelationMethod = Literal["pearson", "spearman"]


def _numeric(frame: pd.DataFrame, columns: Sequence[str]) -> pd.DataFrame:
    columns = list(columns)
    if not columns:
        raise DataError("give at least one column to describe.")
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        raise DataError(f"columns {missing} are not in the data; columns are {list(frame.columns)}.")
    bad = [c for c in columns if not pd.api.types.is_numeric_dtype(frame[c].dtype)]
    if bad:
        raise DataError(f"columns {bad} are not numeric; convert them first (text is not silently dropped).")
    return frame[columns].astype(float)


def table_one(
    frame: pd.DataFrame, columns: Sequence[str], *, percentiles: Sequence[float] = (5, 25, 50, 75, 95)
) -> pd.DataFrame:
    """Distribution of each variable: n, missing, mean, SD, min, percentiles, max, IQR.

    Parameters
    ----------
    frame : DataFrame
        One row per day. Not modified.
    columns : list of str
        Numeric variables to describe (pollutants, weather, outcomes).
    percentiles : sequence of float, default (5, 25, 50, 75, 95)
        Percentiles in 0–100, shown as columns ``p5``, ``p25``, ...; ``iqr`` is always p75 − p25.

    Returns
    -------
    DataFrame
        One row per variable (index: variable name), columns ``n``, ``missing``, ``mean``, ``sd``, ``min``,
        the percentiles, ``max``, ``iqr``.

    Examples
    --------
    >>> import pandas as pd
    >>> table_one(pd.DataFrame({"x": [1.0, 2.0, 3.0, 4.0, None]}), ["x"]).loc["x", ["n", "missing", "p50"]].tolist()
    [4.0, 1.0, 2.5]
    """
    data = _numeric(frame, columns)
    qs = [float(q) for q in percentiles]
    if any(not 0 <= q <= 100 for q in qs):
        raise DataError(f"percentiles {qs} must lie between 0 and 100.")
    rows = {}
    for name in data.columns:
        x = data[name].to_numpy()
        x = x[~np.isnan(x)]
        row = {"n": float(len(x)), "missing": float(len(data) - len(x))}
        if len(x):
            values = np.percentile(x, [*qs, 25.0, 75.0])
            row |= {"mean": x.mean(), "sd": x.std(ddof=1) if len(x) > 1 else np.nan, "min": x.min()}
            row |= {f"p{q:g}": v for q, v in zip(qs, values[:-2], strict=True)}
            row |= {"max": x.max(), "iqr": values[-1] - values[-2]}
        rows[name] = row
    order = ["n", "missing", "mean", "sd", "min", *[f"p{q:g}" for q in qs], "max", "iqr"]
    return pd.DataFrame.from_dict(rows, orient="index").reindex(columns=order)


def correlation_matrix(
    frame: pd.DataFrame, columns: Sequence[str], *, method: CorrelationMethod = "pearson"
) -> pd.DataFrame:
    """Pairwise correlations of pollutants and weather (Pearson, or Spearman rank correlations).

    Uses, for each pair, the days on which both are present; see :func:`pair_counts` for how many.
    """
    check_choice("method", method, CorrelationMethod)
    data = _numeric(frame, columns)
    return data.corr(method=method)


def pair_counts(frame: pd.DataFrame, columns: Sequence[str]) -> pd.DataFrame:
    """Number of days on which both variables of each pair are present."""
    present = _numeric(frame, columns).notna().astype(int)
    return present.T @ present
