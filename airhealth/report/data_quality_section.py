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
from .exposure_plots import (
    plot_count_series,
    plot_coverage,
    plot_exposure_series,
    plot_monitor_series,
    plot_seasonal_pattern,
)
from .labels import Labels, display_name
from .suppression import counts_for_figure, smallest_positive, suppress_table

__all__ = ["data_quality_section", "hourly_quality_section"]


def data_quality_section(
    daily: pd.DataFrame,
    columns: list[str],
    *,
    exposures: Sequence[str] | None = None,
    correlation_method: CorrelationMethod = "pearson",
    title: str = "Exposure and weather data",
    date: str = "date",
    count_columns: Sequence[str] = (),
    suppress_below: int | None = None,
    units: Mapping[str, str] | None = None,
    labels: Labels | None = None,
) -> Section:
    """Table 1, correlation matrix, and time-series and seasonal plots of the daily data.

    Health counts among ``columns`` (named in ``count_columns``) follow the small-count rules of
    :mod:`airhealth.report.suppression` when ``suppress_below`` is given: in Table 1 their small
    quantiles are shown as ``<N`` and their mean, SD and IQR as ``suppressed`` if any day's count is small;
    their series is drawn as weekly or monthly totals (or left out) and their by-month boxes, which show
    daily counts, are left out if any daily count is small.

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
    count_columns : sequence of str
        Which of ``columns`` hold health counts.
    suppress_below : int, optional
        Disclosure threshold for the counts.
    units : mapping, optional
        Unit of some columns (e.g. ``{"o3": "ppb"}``): a ``unit`` column of Table 1 and the axis labels.
    labels : mapping, optional
        Display names of columns (e.g. ``{"pm25": "PM2.5"}``) for the figure captions and axis labels.
    """
    units = dict(units or {})
    describe = _suppressed_table_one(daily, columns, count_columns, suppress_below)
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
        Table("Distribution of the daily variables", describe, name="table_one"),
        Table(
            f"{correlation_method.capitalize()} correlations",
            corr.rename_axis("variable").reset_index(),
            name=f"correlations_{correlation_method}",
            note=f"Pairwise complete days; the smallest pair has {fewest} days.",
        ),
    ]
    for column in exposures if exposures is not None else columns:
        if column in count_columns and suppress_below is not None:
            blocks += _count_figures(daily, column, date, suppress_below, display_name(column, labels))
            continue
        shown = display_name(column, labels)
        label = f"{shown} ({units[column]})" if column in units else (shown if shown != column else None)
        series_ax = plot_exposure_series(daily, column, date=date, label=label)
        blocks.append(Figure(f"{shown} over time", series_ax.figure, name=f"series_{column}"))
        season_ax = plot_seasonal_pattern(daily, column, date=date, label=label)
        blocks.append(
            Figure(
                f"{shown} by month",
                season_ax.figure,
                name=f"season_{column}",
                note="Boxes: quartiles; whiskers: 5th and 95th percentiles; dots: monthly means.",
            )
        )
    return Section(title, blocks)


def _suppressed_table_one(
    daily: pd.DataFrame, columns: list[str], count_columns: Sequence[str], threshold: int | None
) -> pd.DataFrame:
    """Table 1 (rounded), with the count rows' small quantiles and the aggregates hiding them suppressed."""
    describe = table_one(daily, columns).round(3).rename_axis("variable").reset_index()
    rows = describe["variable"].isin(list(count_columns)).to_numpy()
    if threshold is None or not rows.any():
        return describe
    smallest = smallest_positive(daily, list(describe["variable"]))  # used on the count rows only
    return suppress_table(
        describe,
        threshold,
        counts=("min", "p5", "p25", "p50", "p75", "p95", "max"),
        aggregates=("mean", "sd", "iqr"),
        smallest=smallest,
        rows=rows,
    )


def _count_figures(daily: pd.DataFrame, column: str, date: str, threshold: int, shown: str) -> list[Figure]:
    """The series of a count column under the small-count rule; its by-month boxes only if no day is small."""
    ax = plot_count_series(daily, column, date=date, suppress_below=threshold)
    counts = pd.Series(pd.to_numeric(daily[column], errors="coerce").to_numpy(), index=pd.to_datetime(daily[date]))
    drawn = counts_for_figure(counts, threshold)
    figures = [Figure(f"{shown} over time", ax.figure, name=f"series_{column}", note=drawn.note or None)]
    if drawn.resolution == "daily":
        season_ax = plot_seasonal_pattern(daily, column, date=date)
        figures.append(Figure(f"{shown} by month", season_ax.figure, name=f"season_{column}"))
    return figures


def hourly_quality_section(
    clean: pd.DataFrame,
    daily_by_monitor: pd.DataFrame,
    *,
    value: str,
    rule_note: str | None = None,
    title: str = "Hourly monitoring data: coverage and completeness",
    n_gaps: int = 3,
    monitor_names: Mapping[str, str] | None = None,
    label: str | None = None,
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
    monitor_names : mapping, optional
        What each monitor code stands for (``{"NHP": "park"}``), in the figure legends and captions.
    label : str, optional
        The value axis label with its unit, e.g. ``"NO2 (ppb)"`` (default: the value column).
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
    codes = _codes_note(sorted(map(str, daily_by_monitor["monitor"].unique())), monitor_names)
    blocks += [
        Figure("Share of hours present by month", plot_coverage(clean).figure, name="hourly_coverage", note=codes),
        Figure(
            "Daily values per monitor",
            plot_monitor_series(daily_by_monitor, value=value, names=monitor_names, label=label).figure,
            name="monitor_series",
            note=codes,
        ),
    ]
    return Section(title, blocks)


def _codes_note(codes: Sequence[str], names: Mapping[str, str] | None) -> str:
    """A caption line explaining the monitor codes of a figure."""
    named = [f"{c}: {names[c]}" for c in codes if names and c in names]
    unnamed = [c for c in codes if not names or c not in names]
    parts = ["Monitor codes as in the input data"] + (["; ".join(named)] if named else [])
    if unnamed and named:
        parts.append(f"no description given for {', '.join(unnamed)}")
    return ". ".join(parts) + "."
