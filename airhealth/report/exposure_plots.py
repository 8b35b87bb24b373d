"""Plots of daily exposure series: the series over time, per monitor, by season, and hourly coverage.

Every function takes ``ax=None`` and returns the Axes it drew on. Without ``ax`` it makes a new
``matplotlib.figure.Figure`` (object API only: pyplot's global state is never touched, so the functions are
safe under the Agg backend and in servers); the figure is ``ax.figure``. Every figure is drawn in the house
style of :mod:`airhealth.report.style`; a column with no value to draw gives a panel saying "nothing to plot".
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd
from matplotlib.axes import Axes

from ..errors import DataError
from .plots import plain
from .style import CONTRAST, DATA, ESTIMATE, new_figure, nothing_to_plot, styled
from .suppression import counts_for_figure

__all__ = ["plot_count_series", "plot_coverage", "plot_exposure_series", "plot_monitor_series", "plot_seasonal_pattern"]

_MONTHS = ["J", "F", "M", "A", "M", "J", "J", "A", "S", "O", "N", "D"]


def _axes(ax: Axes | None, size: tuple[float, float] = (8.0, 3.2)) -> Axes:
    return ax if ax is not None else new_figure(size)


def _series(frame: pd.DataFrame, column: str, date: str) -> pd.Series:
    for name in (column, date):
        if name not in frame.columns:
            raise DataError(f"column {name!r} is not in the data; columns are {list(frame.columns)}.")
    return pd.Series(frame[column].to_numpy(dtype=float), index=pd.to_datetime(frame[date])).sort_index()


@styled
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
    if not series.notna().any():
        return nothing_to_plot(ax, plain(f"nothing to plot: {column} has no value"))
    ax.plot(series.index, series.to_numpy(), lw=0.6, color=DATA, label="daily")
    if smooth_days:
        smooth = series.rolling(smooth_days, center=True, min_periods=max(1, smooth_days // 2)).mean()
        ax.plot(smooth.index, smooth.to_numpy(), lw=1.6, color=ESTIMATE, label=f"{smooth_days}-day mean")
        ax.legend(loc="upper right", frameon=False, fontsize="small")
    ax.set_ylabel(plain(label or column))
    ax.set_xlabel("date")
    return ax


@styled
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
        ax.plot(shown.observed.index, shown.observed.to_numpy(), lw=0.6, color=DATA, label=shown.resolution)
    per = {"daily": "daily", "weekly": "weekly total", "monthly": "monthly total"}.get(shown.resolution, "")
    ax.set_title(plain(f"{column}: {per}" if per else f"{column}: counts withheld (below {suppress_below})"))
    ax.set_ylabel(plain(f"{column} (count)"))
    ax.set_xlabel("date")
    return ax


@styled
def plot_monitor_series(
    daily: pd.DataFrame,
    *,
    value: str,
    monitor: str = "monitor",
    date: str = "date",
    ax: Axes | None = None,
    names: Mapping[str, str] | None = None,
    label: str | None = None,
) -> Axes:
    """One line per monitor (long-format daily data), to see offsets and outages side by side.

    ``names`` explains monitor codes in the legend (``{"NH01": "Harbour Road"}`` → "NH01 – Harbour Road");
    ``label`` is the y-axis label (give the unit, e.g. "PM2.5 (µg/m³)").
    """
    if monitor not in daily.columns:
        raise DataError(f"column {monitor!r} is not in the data; columns are {list(daily.columns)}.")
    ax = _axes(ax)
    if daily.empty:
        return nothing_to_plot(ax, "nothing to plot: no monitor has a daily value")
    for i, (code, part) in enumerate(daily.groupby(monitor, sort=True)):
        series = _series(part, value, date).asfreq("D")
        shown = f"{code} – {names[code]}" if names and code in names else str(code)
        ax.plot(series.index, series.to_numpy(), lw=0.7, color=f"C{i % 6}", label=plain(shown))
    ax.legend(loc="upper right", frameon=False, fontsize="small", ncols=3, title=plain(f"{monitor} (code)"))
    ax.set_ylabel(plain(label or value))
    ax.set_xlabel("date")
    return ax


@styled
def plot_seasonal_pattern(
    daily: pd.DataFrame, column: str, *, date: str = "date", ax: Axes | None = None, label: str | None = None
) -> Axes:
    """Distribution of the daily values by calendar month (box: quartiles; whiskers: 5th–95th percentiles)."""
    series = _series(daily, column, date).dropna()
    ax = _axes(ax, size=(6.0, 3.2))
    groups = [series[series.index.month == m].to_numpy() for m in range(1, 13)]
    present = [m for m in range(12) if len(groups[m])]
    if not present:
        return nothing_to_plot(ax, plain(f"nothing to plot: {column} has no value"))
    ax.boxplot(
        [groups[m] for m in present],
        positions=[m + 1 for m in present],
        whis=(5, 95),
        showfliers=False,
        widths=0.6,
    )
    ax.plot([m + 1 for m in present], [np.mean(groups[m]) for m in present], "o", ms=3, color=CONTRAST, label="mean")
    ax.set_xticks(range(1, 13), _MONTHS)
    ax.set_xlim(0.3, 12.7)
    ax.set_xlabel("month")
    ax.set_ylabel(plain(label or column))
    ax.legend(loc="upper right", frameon=False, fontsize="small")
    return ax


@styled
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
    ax = _axes(ax, size=(8.0, 2.2 + 0.3 * len(counts)))
    image = ax.imshow(share, aspect="auto", vmin=0, vmax=1, cmap="cividis", interpolation="nearest")
    ax.set_yticks(range(len(counts)), [plain(m) for m in counts.index])
    ax.set_ylabel("monitor (code)")
    ax.set_xlabel("month")
    step = max(1, len(months) // 12)
    ax.set_xticks(range(0, len(months), step), [str(p) for p in months[::step]], rotation=45, ha="right")
    ax.grid(False)
    # horizontal, below the panel: the label fits at any number of monitors (a vertical one was cut off)
    ax.figure.colorbar(image, ax=ax, location="bottom", shrink=0.5, aspect=30, label="share of hours with a value")
    return ax
