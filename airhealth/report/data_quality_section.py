"""Report sections describing the exposure data: Table 1, correlations, series and seasonal plots, coverage.

The functions build :class:`~airhealth.report.document.Section` values only; writers lay them out.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import pandas as pd

from ..prep.describe import CorrelationMethod, correlation_matrix, pair_counts, table_one
from ..prep.monitors import MAX_RATIO, MIN_CORRELATION, MIN_OVERLAP, monitor_agreement
from ..prep.quality import days_lost, hourly_coverage, longest_gaps
from .document import Figure, Section, Table, Text
from .exposure_plots import plot_coverage, plot_exposure_series, plot_monitor_series, plot_seasonal_pattern

__all__ = ["data_quality_section", "hourly_quality_section"]


def data_quality_section(
    daily: pd.DataFrame,
    columns: list[str],
    *,
    exposures: Sequence[str] | None = None,
    correlation_method: CorrelationMethod = "pearson",
    title: str = "Exposure and weather data",
    date: str = "date",
    units: Mapping[str, str] | None = None,
) -> Section:
    """Table 1, correlation matrix, and time-series and seasonal plots of the daily data.

    Parameters
    ----------
    daily : DataFrame
        One row per day. Not modified.
    columns : list of str
        Variables for Table 1 and the correlation matrix (pollutants, weather, outcomes).
    exposures : sequence of str, optional
        Variables to plot over time and by month (default: all ``columns``).
    correlation_method : {"pearson", "spearman"}, default "pearson"
    title : str
        Section title.
    date : str, default "date"
        Date column.
    units : mapping, optional
        Unit of some columns (e.g. ``{"o3": "ppb"}``): a ``unit`` column of Table 1 and the axis labels.
    """
    units = dict(units or {})
    describe = table_one(daily, columns).rename_axis("variable").reset_index()
    if units:
        describe.insert(1, "unit", [units.get(c, "") for c in describe["variable"]])
    corr = correlation_matrix(daily, columns, method=correlation_method).round(2)
    fewest = int(pair_counts(daily, columns).to_numpy().min())
    dates = pd.to_datetime(daily[date])
    blocks: list = [
        Text(
            f"{len(daily)} days from {dates.min():%d %B %Y} to {dates.max():%d %B %Y}. Percentiles by linear "
            "interpolation (R's default type 7); SD with n − 1; IQR = P75 − P25."
        ),
        Table("Distribution of the daily variables", describe.round(3), name="table_one"),
        Table(
            f"{correlation_method.capitalize()} correlations",
            corr.rename_axis("variable").reset_index(),
            name=f"correlations_{correlation_method}",
            note=f"Pairwise complete days; the smallest pair has {fewest} days.",
        ),
    ]
    for column in exposures if exposures is not None else columns:
        label = f"{column} ({units[column]})" if column in units else None
        series_ax = plot_exposure_series(daily, column, date=date, label=label)
        blocks.append(Figure(f"{column} over time", series_ax.figure, name=f"series_{column}"))
        season_ax = plot_seasonal_pattern(daily, column, date=date, label=label)
        blocks.append(
            Figure(
                f"{column} by month",
                season_ax.figure,
                name=f"season_{column}",
                note="Boxes: quartiles; whiskers: 5th and 95th percentiles; dots: monthly means.",
            )
        )
    return Section(title, blocks)


def hourly_quality_section(
    clean: pd.DataFrame,
    daily_by_monitor: pd.DataFrame,
    *,
    value: str,
    rule_note: str | None = None,
    title: str = "Hourly monitoring data: coverage and completeness",
    n_gaps: int = 3,
) -> Section:
    """Coverage per monitor and year, days lost to each rule, longest gaps, monitor agreement, and plots.

    With two or more monitors a "Monitor agreement" table compares each monitor with the mean of the others
    (:func:`~airhealth.prep.monitors.monitor_agreement`: correlation, ratio of means, flag and reason).

    Parameters
    ----------
    clean : DataFrame
        From :func:`~airhealth.prep.hourly_input.clean_hourly`.
    daily_by_monitor : DataFrame
        From :func:`~airhealth.prep.hourly.aggregate_daily` (columns ``monitor``, ``date``, ``value``,
        ``reason``).
    value : str
        Value column of ``daily_by_monitor``.
    rule_note : str, optional
        The completeness rule applied (e.g. ``ValidityRule.source``), shown under the days-lost table.
    """
    coverage = hourly_coverage(clean)
    lost = days_lost(daily_by_monitor)
    gaps = longest_gaps(clean, n=n_gaps)
    blocks: list = [
        Table("Hours with a value, per monitor and year", coverage.round(3), name="hourly_coverage"),
        Table("Days lost to each completeness rule", lost.round(3), name="days_lost", note=rule_note),
        Table(f"Longest gaps (up to {n_gaps} per monitor)", gaps.round({"days": 2}), name="longest_gaps"),
    ]
    if daily_by_monitor["monitor"].nunique() >= 2:
        agreement = monitor_agreement(daily_by_monitor, value=value)
        flagged = int(agreement["flagged"].sum())
        blocks.append(
            Table(
                "Monitor agreement",
                agreement.round({"correlation": 3, "ratio_of_means": 3}),
                name="monitor_agreement",
                note=f"Each monitor against the mean of the others on shared valid days; {flagged} of "
                f"{len(agreement)} monitors flagged (correlation below {MIN_CORRELATION}, a ratio of means outside "
                f"1/{MAX_RATIO:g} to {MAX_RATIO:g}, or fewer than {MIN_OVERLAP} shared days).",
            )
        )
    blocks += [
        Figure("Share of hours present by month", plot_coverage(clean).figure, name="hourly_coverage"),
        Figure(
            "Daily values per monitor",
            plot_monitor_series(daily_by_monitor, value=value).figure,
            name="monitor_series",
        ),
    ]
    return Section(title, blocks)
