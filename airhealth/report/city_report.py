"""The one-city analysis report: effect estimates for several outcomes, pollutants and lags.

:func:`city_sections` fits the models and returns report sections; :func:`write_city_report` writes them
as HTML with CSV tables and PNG figures. Optional sections (data description, lag structures) are added
when their builders are available.
"""

from __future__ import annotations

import importlib
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import pandas as pd

from .._progress import progress
from ..model.compare import compare_results
from .document import Figure, Section, Table, Text
from .html import write_html_report
from .plots import plot_effects, plot_observed_fitted
from .tables import effects_table, format_effects

__all__ = ["city_sections", "write_city_report"]


def _model_text(spec: Any, n_calendar: int) -> str:
    years = n_calendar / 365.25
    parts = [
        f"Quasi-Poisson time-series regression of daily counts over {n_calendar} days ({years:.1f} years): "
        f"natural spline of time with {spec.trend_df_per_year:g} df per year",
    ]
    if spec.temperature:
        parts.append(
            f"natural splines of same-day temperature ({spec.temperature_df} df) and of mean "
            f"temperature over lags {spec.temperature_lags[0]}–{spec.temperature_lags[1]} "
            f"({spec.temperature_lag_df} df)"
        )
    if spec.day_of_week:
        parts.append("day-of-week indicators")
    return "; ".join(parts) + ". Relative risks are per 10 µg/m³ with 95% Wald intervals."


def _forest_figures(table: pd.DataFrame) -> list[Figure]:
    """One forest plot per outcome, rows labelled by pollutant and lag."""
    figures = []
    for outcome, rows in table.groupby("outcome", sort=False):
        labels = [f"{r.exposure} · lag {r.lag}" for r in rows.itertuples()]
        ax = plot_effects(rows, labels=labels, per_label="10 µg/m³")
        ax.set_title(str(outcome))
        figures.append(
            Figure(f"{outcome}: relative risks per 10 µg/m³ with 95% intervals", ax.figure, f"effects_forest_{outcome}")
        )
    return figures


def city_sections(
    data: pd.DataFrame,
    outcomes: Sequence[str],
    exposures: Sequence[str],
    lags: Sequence[str] = ("0", "1", "2", "0-1"),
    per: float = 10.0,
    show_progress: bool = True,
    **model_options: Any,
) -> tuple[list[Section], pd.DataFrame]:
    """Fit every outcome × exposure × lag and build the report sections; returns (sections, effects table)."""
    results, main = [], None
    pairs = [(o, e) for o in outcomes for e in exposures]
    for outcome, exposure in progress(pairs, label="outcome × pollutant", enabled=show_progress):
        fits = compare_results(data, lags, outcome=outcome, exposure=exposure, **model_options)
        results.extend(fits)
        main = main or fits[-1]
    table = effects_table(results, per=per)
    n_calendar = len(data)
    sections = [
        Section("Model", [Text(_model_text(main.spec, n_calendar))]),
        Section(
            "Effect estimates",
            [
                Table(
                    "Relative risks per 10 µg/m³",
                    format_effects(table),
                    "effects",
                    note="Each row is a separate model for one outcome, pollutant and lag (single day or "
                    "moving average of the days shown).",
                ),
                Table("Estimates at full precision", table, "effects_full", display=False),
                *_forest_figures(table),
            ],
        ),
        Section(
            "Model checks",
            [
                Figure(
                    f"Observed and fitted daily {main.spec.outcome} ({main.spec.exposure}, lag {main.spec.lag.label})",
                    plot_observed_fitted(main).figure,
                    "observed_fitted",
                ),
                Table(
                    "Days left out of the main model",
                    main.drop_summary().rename_axis("reason").reset_index(),
                    "dropped_days",
                    count_columns=("days",),
                ),
            ],
        ),
    ]
    sections += _optional_sections(data, outcomes, exposures, model_options)
    return sections, table


def _optional_sections(
    data: pd.DataFrame, outcomes: Sequence[str], exposures: Sequence[str], model_options: dict[str, Any]
) -> list[Section]:
    """Sections contributed by other report modules, included when they are installed."""
    out = []
    builders = [
        (
            "airhealth.report.data_quality_section",
            "data_quality_section",
            lambda f: f(data, [*exposures, *[c for c in ("temperature", "humidity") if c in data]]),
        ),
        (
            "airhealth.report.lag_section",
            "lag_structure_section",
            lambda f: f(data, outcome=outcomes[0], exposure=exposures[0], **model_options),
        ),
    ]
    for module_name, func_name, call in builders:
        try:
            module = importlib.import_module(module_name)
        except ModuleNotFoundError:
            continue
        out.append(call(getattr(module, func_name)))
    return out


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
    **model_options: Any,
) -> tuple[Path, pd.DataFrame]:
    """Fit, build and write the one-city report; returns the path of ``index.html`` and the effects table."""
    sections, table = city_sections(data, outcomes, exposures, lags, show_progress=show_progress, **model_options)
    sections = [*sections, *extra_sections]
    path = write_html_report(sections, out_dir, title=title, small_count_threshold=small_count_threshold)
    return path, table
