"""The one-city analysis report: effect estimates for several outcomes, pollutants and lags.

:func:`city_sections` fits the models and returns report sections; :func:`write_city_report` writes them
as HTML with CSV tables and PNG figures.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Any

import pandas as pd

from .._progress import progress
from ..model.compare import compare_results
from ..model.spec import ModelSpec
from ..prep.describe import table_one
from .data_quality_section import data_quality_section
from .document import Figure, Section, Table, Text
from .html import write_html_report
from .lag_section import lag_structure_section
from .plots import observed_fitted_figure, plain, plot_effects
from .suppression import smallest_positive
from .tables import effects_table, format_effects

__all__ = ["city_sections", "count_summary", "describe_model", "write_city_report"]

_FAMILY = {
    "quasipoisson": "Quasi-Poisson",
    "poisson": "Poisson",
    "negbin": "Negative binomial",
}


def describe_model(spec: ModelSpec, n_calendar: int, per: float = 10.0, unit: str = "µg/m³") -> str:
    """A plain-English description of the confounder model of ``spec``, for a report's methods section."""
    years = n_calendar / 365.25
    if spec.seasonality == "spline":
        season = f"a natural spline of time with {spec.trend_df_per_year:g} df per year"
    else:
        season = f"{spec.fourier_pairs} sine/cosine pairs per year and a linear trend"
    parts = [
        f"{_FAMILY[spec.family]} time-series regression of daily counts over {n_calendar} days "
        f"({years:.1f} years), controlling for season and trend with {season}"
    ]
    if spec.temperature:
        parts.append(f"natural splines of same-day {spec.temperature} ({spec.temperature_df} df)")
        if spec.temperature_lags:
            first, last = spec.temperature_lags
            parts.append(f"of its mean over lags {first}–{last} ({spec.temperature_lag_df} df)")
    if spec.humidity:
        parts.append(f"a natural spline of {spec.humidity} ({spec.humidity_df} df)")
    if spec.day_of_week:
        parts.append("day-of-week indicators")
    if spec.holidays:
        parts.append(f"a public-holiday indicator ({spec.holidays})")
    parts += [f"{t.name}" for t in spec.confounders]
    return (
        "; ".join(parts)
        + f". Relative risks are per {per:g} {unit} with 95% Wald intervals; single-day lags use the exposure "
        "of that day, moving averages the mean of the days shown."
    )


def count_summary(data: pd.DataFrame, outcomes: Sequence[str]) -> pd.DataFrame:
    """Daily counts per outcome: days, total, mean, SD and quantiles (the health counts of the report)."""
    t = table_one(data, outcomes, percentiles=(25, 50, 75))
    totals = data[list(outcomes)].apply(pd.to_numeric, errors="coerce").sum()
    return pd.DataFrame({
        "outcome": t.index, "days": t["n"].astype(int).to_numpy(), "total": totals[t.index].to_numpy(dtype=float),
        "mean": t["mean"].to_numpy(), "sd": t["sd"].to_numpy(), "min": t["min"].to_numpy(),
        "p25": t["p25"].to_numpy(), "median": t["p50"].to_numpy(), "p75": t["p75"].to_numpy(),
        "max": t["max"].to_numpy(),
    })  # fmt: skip


def _forest_figures(table: pd.DataFrame, per: float, unit: str) -> list[Figure]:
    """One forest plot per outcome, rows labelled by pollutant and lag."""
    figures = []
    for outcome, rows in table.groupby("outcome", sort=False):
        labels = [f"{r.exposure} · lag {r.lag}" for r in rows.itertuples()]
        ax = plot_effects(rows, labels=labels, per_label=f"{per:g} {unit}")
        ax.set_title(plain(outcome))
        title = f"{outcome}: relative risks per {per:g} {unit} with 95% intervals"
        figures.append(Figure(title, ax.figure, f"effects_forest_{outcome}"))
    return figures


def city_sections(
    data: pd.DataFrame,
    outcomes: Sequence[str],
    exposures: Sequence[str],
    lags: Sequence[str] = ("0", "1", "2", "0-1"),
    per: float = 10.0,
    unit: str = "µg/m³",
    show_progress: bool = True,
    lag_section: bool = True,
    small_count_threshold: int | None = None,
    **model_options: Any,
) -> tuple[list[Section], pd.DataFrame]:
    """Fit every outcome × exposure × lag and build the report sections; returns (sections, effects table).

    The first outcome and exposure are the main model: its fit is shown against the data and its lag
    structures are explored in a section of their own (``lag_section=False`` leaves that out).
    """
    results: list[Any] = []
    pairs = [(o, e) for o in outcomes for e in exposures]
    for outcome, exposure in progress(pairs, label="outcome × pollutant", enabled=show_progress):
        results.extend(compare_results(data, lags, outcome=outcome, exposure=exposure, **model_options))
    main = results[len(lags) - 1]
    table = effects_table(results, per=per)
    sections = [
        Section("Model", [Text(describe_model(main.spec, len(data), per, unit))]),
        Section(
            "Daily health counts",
            [
                Table(
                    "Daily counts per outcome",
                    count_summary(data, outcomes).round(2),
                    "daily_counts",
                    count_columns=("min", "p25", "median", "p75", "max"),
                    aggregate_columns=("total", "mean", "sd"),
                    smallest_counts=smallest_positive(data, outcomes),
                ),
            ],
        ),
        Section(
            "Effect estimates",
            [
                Table(
                    f"Relative risks per {per:g} {unit}",
                    format_effects(table),
                    "effects",
                    note="Each row is a separate model for one outcome, pollutant and lag. QAIC compares models "
                    "fitted on the same days only: rows with different day counts are not comparable.",
                ),
                Table("Estimates at full precision", table, "effects_full", display=False),
                *_forest_figures(table, per, unit),
            ],
        ),
        Section(
            "Model checks",
            [
                observed_fitted_figure(main, small_count_threshold),
                Table(
                    "Days left out of the main model",
                    main.drop_summary().rename_axis("reason").reset_index(),
                    "dropped_days",
                ),
            ],
        ),
    ]
    weather = [c for c in (model_options.get("temperature"), model_options.get("humidity")) if c]
    sections.append(data_quality_section(data, [*exposures, *weather], exposures=list(exposures)))
    if lag_section:
        sections.append(
            lag_structure_section(data, outcome=outcomes[0], exposure=exposures[0], per=per, **model_options)
        )
    return sections, table


def write_city_report(
    data: pd.DataFrame,
    out_dir: str | Path,
    outcomes: Sequence[str],
    exposures: Sequence[str],
    lags: Sequence[str] = ("0", "1", "2", "0-1"),
    title: str = "Short-term effects of air pollution",
    small_count_threshold: int | None = None,
    show_progress: bool = True,
    extra_sections: Sequence[Section] = (),
    **options: Any,
) -> tuple[Path, pd.DataFrame]:
    """Fit, build and write the one-city report; returns the path of ``index.html`` and the effects table.

    ``options`` are those of :func:`city_sections` (``per``, ``unit``, ``lag_section``) and any model option.
    Counts below ``small_count_threshold`` are suppressed in the count tables and figures (local disclosure
    rules: :mod:`airhealth.report.suppression`).
    """
    sections, table = city_sections(
        data,
        outcomes,
        exposures,
        lags,
        show_progress=show_progress,
        small_count_threshold=small_count_threshold,
        **options,
    )
    path = write_html_report(
        [*sections, *extra_sections], out_dir, title=title, small_count_threshold=small_count_threshold
    )
    return path, table
