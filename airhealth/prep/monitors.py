"""Several monitors → one city series: completeness screening, combination, and agreement flags.

A city's daily exposure is usually built from a few monitors that are missing on different days. The plain
mean of the monitors available each day then jumps whenever a high (or low) monitor drops out. The centred
method removes that artefact: each monitor is centred on its own long-term mean, the deviations available on
a day are averaged, and the overall level is added back:

    city(d) = m̄ + mean_{k available on d} (x_kd − m_k),       m̄ = mean_k m_k,

where ``m_k`` is monitor k's mean over its valid days. With all monitors present every day it equals the plain
mean. ``m̄`` is the unweighted mean of the monitor means, so a monitor's weight in the level does not depend on
how many days it reported.

References
----------
.. [1] Samet JM, Dominici F, Zeger SL, Schwartz J, Dockery DW (2000). The National Morbidity, Mortality, and
   Air Pollution Study. Part I: Methods and methodologic issues. HEI Research Report 94 (monitor-centred,
   trimmed daily averages across monitors; from memory, details unverified).
.. [2] Directive 2008/50/EC, Annex I (minimum data capture of 90 % for fixed measurements, before allowance for
   maintenance; from memory). The default yearly screening fraction here, 75 %, is a common-practice choice
   for epidemiology, not a regulatory value.
"""

from __future__ import annotations

from typing import Literal

import numpy as np
import pandas as pd

from .._choices import check_choice
from ..errors import DataError, SpecificationError

__all__ = ["CombineMethod", "combine_monitors", "monitor_agreement", "screen_monitor_years"]

CombineMethod = Literal["mean", "centred"]

# Defaults of monitor_agreement (judgement; see its docstring), shared with the report's note.
MIN_CORRELATION = 0.5
MAX_RATIO = 3.0
MIN_OVERLAP = 30


def _wide(daily: pd.DataFrame, value: str, monitor: str, date: str) -> pd.DataFrame:
    """Monitor-by-date table of values (dates as rows); checks columns and duplicates."""
    for name in (value, monitor, date):
        if name not in daily.columns:
            raise DataError(f"column {name!r} is not in the daily data; columns are {list(daily.columns)}.")
    if not pd.api.types.is_numeric_dtype(daily[value].dtype):
        raise DataError(f"column {value!r} must be numeric; convert it first (non-numbers are not dropped).")
    dates = pd.to_datetime(daily[date], errors="coerce")
    if dates.isna().any():
        raise DataError(
            f"column {date!r} has missing or unreadable dates in rows {list(daily.index[dates.isna()][:10])}."
        )
    frame = pd.DataFrame({"monitor": daily[monitor].astype(str), "date": dates.dt.normalize(), "value": daily[value]})
    dup = frame.duplicated(["monitor", "date"], keep=False)
    if dup.any():
        shown = "; ".join(f"{m} {d:%Y-%m-%d}" for m, d in frame.loc[dup, ["monitor", "date"]].head(10).to_numpy())
        raise DataError(f"monitor and date repeated in the daily data: {shown}. Keep one row per monitor and day.")
    return frame.pivot(index="date", columns="monitor", values="value").sort_index().astype(float)


def screen_monitor_years(
    daily: pd.DataFrame,
    *,
    value: str,
    monitor: str = "monitor",
    date: str = "date",
    min_fraction: float = 0.75,
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Blank monitor-years with too few valid days.

    A monitor's year is kept if its valid (non-missing) days are at least ``min_fraction`` of that year's days
    inside the study period (first to last date over all monitors); otherwise its values that year are set
    to missing.

    Returns
    -------
    screened : DataFrame
        A copy of ``daily`` with ``value`` set to NaN in the monitor-years not kept.
    table : DataFrame
        One row per monitor and year: ``monitor``, ``year``, ``days`` (in the study period), ``valid_days``,
        ``fraction``, ``kept``.
    """
    if not 0.0 <= min_fraction <= 1.0:
        raise SpecificationError(f"min_fraction={min_fraction!r} must lie between 0 and 1.")
    wide = _wide(daily, value, monitor, date)
    calendar = pd.date_range(wide.index.min(), wide.index.max(), freq="D")
    wide = wide.reindex(calendar)
    years = wide.index.year
    valid = wide.notna().groupby(years).sum()
    days = pd.Series(1, index=calendar).groupby(years).sum()
    table = valid.stack().rename("valid_days").reset_index()
    table.columns = ["year", "monitor", "valid_days"]
    table["days"] = table["year"].map(days)
    table["fraction"] = table["valid_days"] / table["days"]
    table["kept"] = table["fraction"] >= min_fraction
    table = table[["monitor", "year", "days", "valid_days", "fraction", "kept"]]
    dropped = set(map(tuple, table.loc[~table["kept"], ["monitor", "year"]].to_numpy()))
    keys = zip(daily[monitor].astype(str), pd.to_datetime(daily[date]).dt.year, strict=True)
    blank = np.array([key in dropped for key in keys], dtype=bool)
    screened = daily.copy()
    screened[value] = screened[value].mask(blank)
    return screened, table.sort_values(["monitor", "year"], ignore_index=True)


def combine_monitors(
    daily: pd.DataFrame,
    *,
    value: str,
    monitor: str = "monitor",
    date: str = "date",
    method: CombineMethod = "centred",
    min_monitors: int = 1,
) -> pd.DataFrame:
    """One city series from several monitors' daily values.

    Parameters
    ----------
    daily : DataFrame
        Long format: one row per monitor and day (NaN for invalid days). Not modified.
    value, monitor, date : str
        Column names.
    method : {"centred", "mean"}, default "centred"
        ``"mean"``: the mean of the monitors available on the day. ``"centred"``: the centred-deviation
        method of the module docstring.
    min_monitors : int, default 1
        Days with fewer monitors available get NaN.

    Returns
    -------
    DataFrame
        ``date``, ``value`` (named as the input column), ``n_monitors``; one row per calendar day from the
        first to the last date.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> daily = pd.DataFrame({"monitor": ["a", "a", "b"], "date": ["2022-01-01", "2022-01-02", "2022-01-01"],
    ...                       "no2": [10.0, 12.0, 20.0]})
    >>> combine_monitors(daily, value="no2")["no2"].tolist()
    [15.0, 16.5]
    """
    check_choice("method", method, CombineMethod)
    if int(min_monitors) != min_monitors or min_monitors < 1:
        raise SpecificationError(f"min_monitors={min_monitors!r} must be a whole number of at least 1.")
    wide = _wide(daily, value, monitor, date)
    wide = wide.reindex(pd.date_range(wide.index.min(), wide.index.max(), freq="D"))
    n = wide.notna().sum(axis=1)
    if method == "mean":
        city = wide.mean(axis=1)
    else:
        centres = wide.mean(axis=0)
        city = centres.mean() + (wide - centres).mean(axis=1)
    city = city.where(n >= min_monitors)
    return pd.DataFrame({"date": wide.index, value: city.to_numpy(), "n_monitors": n.to_numpy()})


def monitor_agreement(
    daily: pd.DataFrame,
    *,
    value: str,
    monitor: str = "monitor",
    date: str = "date",
    min_correlation: float = MIN_CORRELATION,
    max_ratio: float = MAX_RATIO,
    min_overlap: int = MIN_OVERLAP,
) -> pd.DataFrame:
    """Compare each monitor with the mean of the others; flag monitors that disagree strongly.

    For each monitor, on the days it and at least one other monitor are valid: the Pearson correlation of its
    daily values with the mean of the other monitors, and the ratio of its mean to theirs. A monitor is
    flagged when the correlation is below ``min_correlation`` or the ratio is above ``max_ratio`` (or below
    its inverse). The thresholds are judgement (common practice, no source): monitors of one city usually
    correlate at 0.6–0.9 for NO2 and higher for ozone and PM2.5; differences in level are expected between
    traffic and background sites and are what the centred method absorbs.

    Returns
    -------
    DataFrame
        ``monitor``, ``overlap_days``, ``correlation``, ``ratio_of_means``, ``flagged``, ``reason``.
    """
    wide = _wide(daily, value, monitor, date)
    if wide.shape[1] < 2:
        raise DataError("agreement needs at least two monitors.")
    rows = []
    for name in wide.columns:
        others = wide.drop(columns=name).mean(axis=1)
        both = wide[name].notna() & others.notna()
        x, y = wide.loc[both, name], others[both]
        enough = int(both.sum()) >= min_overlap
        corr = float(np.corrcoef(x, y)[0, 1]) if enough and x.std() > 0 and y.std() > 0 else np.nan
        ratio = float(x.mean() / y.mean()) if enough and y.mean() != 0 else np.nan
        reasons = []
        if not enough:
            reasons.append(f"fewer than {min_overlap} days shared with other monitors")
        if np.isfinite(corr) and corr < min_correlation:
            reasons.append(f"correlation {corr:.2f} with the other monitors is below {min_correlation}")
        if np.isfinite(ratio) and not (1 / max_ratio <= ratio <= max_ratio):
            reasons.append(f"mean is {ratio:.2f} times the others'")
        rows.append((name, int(both.sum()), corr, ratio, bool(reasons), "; ".join(reasons) or None))
    columns = ["monitor", "overlap_days", "correlation", "ratio_of_means", "flagged", "reason"]
    return pd.DataFrame(rows, columns=columns)
