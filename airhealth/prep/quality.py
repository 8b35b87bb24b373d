"""Data-quality summaries of hourly monitoring data: coverage, days lost to each rule, longest gaps.

All functions take the clean hourly frame of :func:`~airhealth.prep.hourly_input.clean_hourly` (columns
``monitor``, ``hour``, ``value``) or the daily frame of :func:`~airhealth.prep.hourly.aggregate_daily`, and
return tidy DataFrames for reports. The study period is the span of the data over all monitors, so a monitor
that starts late or stops early shows that as missing coverage.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import DataError

__all__ = ["days_lost", "hourly_coverage", "longest_gaps"]

_HOUR = pd.Timedelta(hours=1)


def _check(frame: pd.DataFrame, columns: tuple[str, ...], what: str) -> None:
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        raise DataError(f"the {what} frame lacks columns {missing}; it has {list(frame.columns)}.")


def _presence(clean: pd.DataFrame) -> tuple[pd.DatetimeIndex, dict[str, np.ndarray]]:
    """Study-period hourly grid and, per monitor, whether each hour has a value."""
    _check(clean, ("monitor", "hour", "value"), "clean hourly")
    grid = pd.date_range(clean["hour"].min(), clean["hour"].max(), freq="h")
    present = {}
    for name, part in clean.groupby("monitor", sort=True):
        mask = np.zeros(len(grid), dtype=bool)
        have = part.loc[part["value"].notna(), "hour"]
        mask[((have - grid[0]) // _HOUR).to_numpy()] = True
        present[str(name)] = mask
    return grid, present


def hourly_coverage(clean: pd.DataFrame) -> pd.DataFrame:
    """Hours with a value, per monitor and year, out of the hours of that year in the study period.

    Returns
    -------
    DataFrame
        ``monitor``, ``year``, ``hours`` (in the study period), ``hours_present``, ``fraction``; plus one row
        per monitor with ``year`` = ``"all"``.
    """
    grid, present = _presence(clean)
    years = pd.Series(grid.year, index=np.arange(len(grid)))
    rows = []
    for name, mask in present.items():
        per_year = pd.Series(mask).groupby(years).agg(["size", "sum"])
        for year, (size, got) in per_year.iterrows():
            rows.append((name, str(year), int(size), int(got)))
        rows.append((name, "all", len(mask), int(mask.sum())))
    out = pd.DataFrame(rows, columns=["monitor", "year", "hours", "hours_present"])
    out["fraction"] = out["hours_present"] / out["hours"]
    return out


def days_lost(daily: pd.DataFrame, *, monitor: str = "monitor", reason: str = "reason") -> pd.DataFrame:
    """Invalid days per monitor and reason (the ``reason`` column written by the daily aggregation).

    Returns
    -------
    DataFrame
        ``monitor``, ``reason``, ``days``, ``share`` (of that monitor's days), sorted by monitor and count;
        a monitor with no lost days has no rows.
    """
    _check(daily, (monitor, reason), "daily")
    total = daily.groupby(monitor).size()
    lost = daily[daily[reason].notna()]
    out = lost.groupby([monitor, reason]).size().rename("days").reset_index()
    out["share"] = out["days"] / out[monitor].map(total).to_numpy()
    out = out.rename(columns={monitor: "monitor", reason: "reason"})
    return out.sort_values(["monitor", "days"], ascending=[True, False], ignore_index=True)


def longest_gaps(clean: pd.DataFrame, *, n: int = 5) -> pd.DataFrame:
    """The ``n`` longest runs of consecutive missing hours of each monitor within the study period.

    Returns
    -------
    DataFrame
        ``monitor``, ``first_missing`` and ``last_missing`` (hour starts, local standard time), ``hours``,
        ``days`` (= hours / 24), longest first.
    """
    grid, present = _presence(clean)
    rows = []
    for name, mask in present.items():
        edges = np.diff(np.concatenate([[0], (~mask).astype(np.int8), [0]]))
        starts, stops = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
        lengths = stops - starts
        for i in np.argsort(-lengths, kind="stable")[:n]:
            rows.append((name, grid[starts[i]], grid[stops[i] - 1], int(lengths[i])))
    out = pd.DataFrame(rows, columns=["monitor", "first_missing", "last_missing", "hours"])
    out["days"] = out["hours"] / 24.0
    return out
