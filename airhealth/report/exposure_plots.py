"""Plots of daily exposure series: the series over time, per monitor, by season, and hourly coverage.

Every function takes ``ax=None`` and returns the Axes it drew on. Without ``ax`` it makes a new
``matplotlib.figure.Figure`` (object API only: pyplot's global state is never touched, so the functions are
safe under the Agg backend and in servers); the figure is ``ax.figure``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure

from ..errors import DataError
from .plots import plain
from .suppression import counts_for_figure

__all__ = ["plot_count_series", "plot_coverage", "plot_exposure_series", "plot_monitor_series", "plot_seasonal_pattern"]

_MONTHS = ["J", "F", "M", "A", "M", "J", "J", "A", "S", "O", "N", "D"]


def _axes(ax: Axes | None, size: tuple[float, float] = (8.0, 3.2)) -> Axes:
    if ax is not None:
        return ax
    figure = Figure(figsize=size, layout="constrained")
    return figure.add_subplot()


def _series(frame: pd.DataFrame, column: str, date: str) -> pd.Series:
    for name in (column, date):
        if name not in frame.columns:
            raise DataError(f"column {name!r} is not in the data; columns are {list(frame.columns)}.")
    return pd.Series(frame[column].to_numpy(dtype=float), index=pd.to_datetime(frame[date])).sort_index()


def plot_exposure_series(
    daily: pd.DataFrame,
    column: str,
    *,
    date: str = "date",
    smooth_days: int | None = 30,
    ax: Axes | None = None,
    label: str | None = None,
) -> Axes:
    """Daily values over time (gaps left blank), with an optional centred running mean.

    Parameters
    ----------
    smooth_days : int or None, default 30
        Window of the centred running mean drawn over the daily values (needs half the window present).
    label : str, optional
        y-axis label (default: the column name).
    """
    series = _series(daily, column, date)
    series = series.asfreq("D") if series.index.is_unique else series
    ax = _axes(ax)
    ax.plot(series.index, series.to_numpy(), lw=0.6, color="0.55", label="daily")
    if smooth_days:
        smooth = series.rolling(smooth_days, center=True, min_periods=max(1, smooth_days // 2)).mean()
        ax.plot(smooth.index, smooth.to_numpy(), lw=1.6, color="C0", label=f"{smooth_days}-day mean")
        ax.legend(loc="upper right", frameon=False, fontsize="small")
    ax.set_ylabel(plain(label or column))
    ax.set_xlabel("date")
    return ax


def plot_count_series(
    daily: pd.DataFrame,
    column: str,
    *,
    suppress_below: int | None,
    date: str = "date",
    ax: Axes | None = None,
) -> Axes:
    """Daily health counts over time under the small-count rule of :mod:`airhealth.report.suppression`.

    Daily values when none is from 1 to ``suppress_below − 1``; else weekly or monthly totals; else nothing
    but a title saying the counts are withheld. No running mean is drawn (it would be another aggregate).
    """
    shown = counts_for_figure(_series(daily, column, date), suppress_below)
    ax = _axes(ax)
    if shown.resolution != "omitted":
        ax.plot(shown.observed.index, shown.observed.to_numpy(), lw=0.6, color="0.35", label=shown.resolution)
    per = {"daily": "daily", "weekly": "weekly total", "monthly": "monthly total"}.get(shown.resolution, "")
    ax.set_title(plain(f"{column}: {per}" if per else f"{column}: counts withheld (below {suppress_below})"))
    ax.set_ylabel(plain(column))
    ax.set_xlabel("date")
    return ax


def plot_monitor_series(
    daily: pd.DataFrame,
    *,
    value: str,
    monitor: str = "monitor",
    date: str = "date",
    ax: Axes | None = None,
) -> Axes:
    """One line per monitor (long-format daily data), to see offsets and outages side by side."""
    if monitor not in daily.columns:
        raise DataError(f"column {monitor!r} is not in the data; columns are {list(daily.columns)}.")
    ax = _axes(ax)
    for i, (name, part) in enumerate(daily.groupby(monitor, sort=True)):
        series = _series(part, value, date).asfreq("D")
        ax.plot(series.index, series.to_numpy(), lw=0.7, color=f"C{i % 10}", label=plain(name))
    ax.legend(loc="upper right", frameon=False, fontsize="small", ncols=3)
    ax.set_ylabel(plain(value))
    ax.set_xlabel("date")
    return ax


def plot_seasonal_pattern(
    daily: pd.DataFrame, column: str, *, date: str = "date", ax: Axes | None = None, label: str | None = None
) -> Axes:
    """Distribution of the daily values by calendar month (box: quartiles; whiskers: 5th–95th percentiles)."""
    series = _series(daily, column, date).dropna()
    ax = _axes(ax, size=(6.0, 3.2))
    groups = [series[series.index.month == m].to_numpy() for m in range(1, 13)]
    present = [m for m in range(12) if len(groups[m])]
    if not present:
        raise DataError(f"column {column!r} has no values to plot.")
    ax.boxplot(
        [groups[m] for m in present],
        positions=[m + 1 for m in present],
        whis=(5, 95),
        showfliers=False,
        widths=0.6,
    )
    ax.plot([m + 1 for m in present], [np.mean(groups[m]) for m in present], "o", ms=3, color="C3", label="mean")
    ax.set_xticks(range(1, 13), _MONTHS)
    ax.set_xlim(0.3, 12.7)
    ax.set_xlabel("month")
    ax.set_ylabel(plain(label or column))
    ax.legend(loc="upper right", frameon=False, fontsize="small")
    return ax


def plot_coverage(clean: pd.DataFrame, *, ax: Axes | None = None) -> Axes:
    """Share of hours with a value, per monitor (rows) and month (columns), from the clean hourly frame."""
    for name in ("monitor", "hour", "value"):
        if name not in clean.columns:
            raise DataError(f"the clean hourly frame lacks column {name!r}.")
    months = pd.period_range(clean["hour"].min(), clean["hour"].max(), freq="M")
    hours_in_month = months.days_in_month.to_numpy() * 24
    present = clean[clean["value"].notna()]
    counts = present.groupby(["monitor", present["hour"].dt.to_period("M")]).size().unstack(fill_value=0)
    counts = counts.reindex(columns=months, fill_value=0)
    share = counts.to_numpy() / hours_in_month
    ax = _axes(ax, size=(8.0, 0.5 + 0.45 * len(counts)))
    image = ax.imshow(share, aspect="auto", vmin=0, vmax=1, cmap="viridis", interpolation="nearest")
    ax.set_yticks(range(len(counts)), [plain(m) for m in counts.index])
    step = max(1, len(months) // 12)
    ax.set_xticks(range(0, len(months), step), [str(p) for p in months[::step]], rotation=45, ha="right")
    ax.figure.colorbar(image, ax=ax, label="share of hours present")
    return ax
