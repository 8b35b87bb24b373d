"""The one-city report for the user's own data: the outcomes, exposures and lag structures asked for, and no more.

:func:`write_report` fits every outcome × exposure × lag structure, builds the report sections and writes
them as HTML with CSV tables and PNG figures (``airhealth report`` on the command line; ``airhealth demo``
runs it on the bundled sample). An outcome or exposure whose data fail (no events, a constant series, a
lag window that leaves too few days, ...) is listed in the report with its error, and the rest completes.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from ..burden.result import CAUTION as BURDEN_CAUTION
from ..errors import DataError
from ..prep.describe import table_one
from ..prep.missing_codes import apply_na_values
from ..prep.validate import parse_dates
from .analysis_sections import MainModel, analysis_sections, check_analyses, methods_text, split_analyses
from .data_quality_section import data_quality_section
from .document import CAUTION, Figure, Section, Table, Text
from .export import parse_formats
from .forest_plot import plot_forest, rr_limits
from .html import write_html_report
from .labels import Labels, check_labels, display_name
from .lag_plots import plot_lag_response
from .methods_paragraph import describe_model
from .plots import observed_fitted_figure, plain
from .report_fits import ReportFits, ReportRequest, check_request, fit_request
from .suppression import mask_small_numbers, smallest_positive
from .tables import effects_table, format_effects

__all__ = [
    "ReportContent",
    "check_output_folder",
    "count_summary",
    "describe_model",
    "report_content",
    "write_content",
    "write_report",
]


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


@dataclass
class ReportContent:
    """What a report holds before it is written: sections, the effects table and what could not be done."""

    sections: list[Section]
    effects: pd.DataFrame
    failures: pd.DataFrame  # outcome, exposure, lag, error
    warnings: pd.DataFrame  # outcome, exposure, warning
    main: Any  # the FitResult of the main model
    caution: str = CAUTION  # the page's caution text (with the burden's assumptions when a burden is shown)


# -- sections ----------------------------------------------------------------------------------------------


def _unit_text(exposures: Sequence[str], request: ReportRequest) -> str:
    """The one unit of ``exposures``, or words saying that they differ."""
    used = {request.unit_of(e) for e in exposures}
    return used.pop() if len(used) == 1 else "units of each exposure (see the 'per' column)"


def _per_text(per: float, exposures: Sequence[str], request: ReportRequest) -> str:
    return f"{per:g} {_unit_text(exposures, request)}"


def _effects_tables(
    table: pd.DataFrame, per: float, level: float, request: ReportRequest, labels: Labels | None = None
) -> list[Any]:
    shown = format_effects(table, level=level, labels=labels)
    exposures = list(dict.fromkeys(table["exposure"]))
    note = (
        "Each row is a separate model for one outcome, exposure and lag. QAIC compares models fitted on the same "
        "days only: rows with different day counts are not comparable."
    )  # the writers add a note for each abbreviation and lag code (tables.table_notes)
    return [
        Table(f"Relative risks per {_per_text(per, exposures, request)}", shown, "effects", note=note),
        Table("Estimates at full precision", table, "effects_full", display=False),
    ]


_ABBREVIATIONS = (
    "RR: relative risk; CI: confidence interval. Lag 0: the same day; 0-1: the mean of the same day and the day "
    "before; dl0-5: a distributed lag over days 0 to 5 (the cumulative effect). Rows are sorted by estimate; "
    "every outcome's figure uses the same log scale."
)


def _forest_figures(
    table: pd.DataFrame, per: float, level: float, request: ReportRequest, labels: Labels | None = None
) -> list[Figure]:
    """One forest plot per outcome, rows labelled by exposure (with its unit) and lag (display names), one x-scale."""
    figures = []
    limits = rr_limits(table) if len(table) else None
    for outcome, rows in table.groupby("outcome", sort=False):
        exposures = list(dict.fromkeys(rows["exposure"]))
        single = len({request.unit_of(e) for e in exposures}) == 1
        rows_text = [
            f"{display_name(r.exposure, labels)} · lag {r.lag}"
            + ("" if single else f" (per {per:g} {request.unit_of(r.exposure)})")
            for r in rows.itertuples()
        ]
        per_label = _per_text(per, exposures, request) if single else f"{per:g} units"
        xlabel = f"relative risk per {per_label} ({level:.0%} CI)"
        name = display_name(outcome, labels)
        ax = plot_forest(rows.assign(row=rows_text), "row", None, xlabel=xlabel, limits=limits, level=level, title=name)
        title = f"{name}: relative risks per {_per_text(per, exposures, request)} with {level:.0%} intervals"
        figures.append(Figure(title, ax.figure, f"effects_forest_{outcome}", note=_ABBREVIATIONS))
    return figures


def fit_notes(results: Sequence[Any]) -> list[Text]:
    """One paragraph per distinct note on how the fits were obtained (aliased columns, Poisson fallback)."""
    notes = dict.fromkeys(note for r in results for note in r.notes)
    labelled = {n: sorted({f"{r.spec.outcome} ~ {r.spec.exposure}" for r in results if n in r.notes}) for n in notes}
    return [Text(f"Note ({', '.join(labelled[n])}): {n}") for n in notes]


def _main_blocks(
    main: Any,
    replaced: str,
    small_count_threshold: int | None = None,
    results: Sequence[Any] = (),
    labels: Labels | None = None,
) -> list[Any]:
    """The main model: which it is, its fit against the data, its dropped days; then the fits' notes.

    The main model's aliased columns are listed by name unless one of its notes already names them; the
    notes of every fit (``results``, which include the main one) follow, one paragraph per distinct note.
    """
    spec = main.spec
    name = f"{spec.outcome}, {spec.exposure} ({spec.unit}), lag {spec.lag.label}"
    blocks: list[Any] = [Text(replaced or f"The main model is {name}.")]
    if main.aliased and not any(main.aliased[0] in note for note in main.notes):
        blocks.append(
            Text(
                "Columns of the confounder model with no support among the days used were dropped (aliased), as "
                f"R's glm does: {', '.join(main.aliased)}."
            )
        )
    blocks += [
        observed_fitted_figure(main, small_count_threshold, labels=labels),
        Table(
            "Days left out of the main model",
            main.drop_summary().rename_axis("reason").reset_index(),
            "dropped_days",
        ),
        *fit_notes(results),
    ]
    return blocks


def _lag_blocks(results: list[Any], per: float, level: float, labels: Labels | None = None) -> list[Any]:
    """Per-lag effects and lag-response figures of the distributed lags of the main outcome and exposure."""
    distributed = [r for r in results if r is not None and r.spec.lag.is_distributed]
    if not distributed:
        return []
    frames = [r.lag_effects(per=per, level=level).assign(lag_structure=r.spec.lag.label) for r in distributed]
    table = pd.concat(frames, ignore_index=True)[["lag_structure", "lag", "coef", "se", "rr", "rr_low", "rr_high"]]
    spec = distributed[0].spec
    title = (
        f"Per-lag effects of the distributed lags of {display_name(spec.exposure, labels)} (RR per {per:g} {spec.unit})"
    )
    blocks: list[Any] = [Table(title, table, "lag_effects")]
    for r in distributed:
        ax = plot_lag_response(r, per=per, level=level)
        ax.set_ylabel(plain(f"RR per {per:g} {r.spec.unit}"))
        name = "lag_response_" + "".join(ch if ch.isalnum() else "_" for ch in r.spec.lag.label)
        title = f"{r.spec.exposure}: relative risk per {per:g} {r.spec.unit} at each lag, {r.spec.lag.label}"
        blocks.append(Figure(title, ax.figure, name))
    return blocks


def _problem_sections(
    failures: pd.DataFrame, caught: pd.DataFrame, outcomes: Sequence[str], threshold: int | None
) -> list[Section]:
    """Failed analyses and warnings; small numbers in messages about outcomes follow the suppression rule."""
    failures, caught = (
        frame.map(lambda v: mask_small_numbers(v, outcomes, threshold) if isinstance(v, str) else v)
        for frame in (failures, caught)
    )
    sections = []
    if len(failures):
        sections.append(
            Section(
                "Analyses that could not be completed",
                [
                    Text(
                        "These outcome and exposure combinations failed on their data; every other analysis below "
                        "is complete. 'all' means every lag structure failed with the same message."
                    ),
                    Table("Failed analyses", failures, "failed_analyses"),
                ],
            )
        )
    if len(caught):
        sections.append(Section("Warnings", [Table("Warnings raised while fitting", caught, "warnings")]))
    return sections


def _asked_text(request: ReportRequest, main: Any) -> str:
    with_units = ", ".join(f"{e} ({request.unit_of(e)})" for e in request.exposures)
    return (
        f"Outcomes: {', '.join(request.outcomes)}. Exposures: {with_units}. Lag structures: "
        f"{', '.join(lag.label for lag in request.lags)}. Main model: {main.spec.outcome}, {main.spec.exposure}, "
        f"lag {main.spec.lag.label}."
    )


def _count_section(data: pd.DataFrame, outcomes: list[str]) -> Section:
    """The daily counts per outcome; small counts, and totals and means resting on them, are suppressed."""
    table = Table(
        "Daily counts per outcome",
        count_summary(data, outcomes),
        "daily_counts",
        count_columns=("min", "p25", "median", "p75", "max"),
        aggregate_columns=("total", "mean", "sd"),
        smallest_counts=smallest_positive(data, outcomes),
    )
    return Section("Daily health counts", [table])


def _effects(fits: ReportFits, per: float, level: float) -> pd.DataFrame:
    """The effects table: one row per successful fit, with the exposure's unit beside ``per`` and per IQR."""
    return effects_table(fits.done, per=per, level=level, iqr=True)


def _sections(
    data: pd.DataFrame,
    request: ReportRequest,
    fits: ReportFits,
    table: pd.DataFrame,
    options: dict[str, Any],
    threshold: int | None,
    labels: Labels | None = None,
) -> list[Section]:
    """Every section of the report, in order (``threshold``: the small-count threshold of the figures)."""
    per, level, main, done = request.per, request.level, fits.main, fits.done
    outcomes = list(dict.fromkeys(r.spec.outcome for r in done))
    exposures = list(dict.fromkeys(r.spec.exposure for r in done))
    lag_labels = [lag.label for lag in request.lags]
    model_text = describe_model(main.spec, len(data), per, _unit_text(exposures, request), level, lag_labels)
    weather = [c for c in (options.get("temperature"), options.get("humidity")) if c]
    main_pair = fits.results[(main.spec.outcome, main.spec.exposure)]
    return [
        Section("Analyses", [Text(_asked_text(request, main)), Text(model_text)]),
        *_problem_sections(fits.failures, fits.warnings, request.outcomes, threshold),
        _count_section(data, outcomes),
        Section("Effect estimates", [*_effects_tables(table, per, level, request, labels), *_forest_figures(table, per, level, request, labels)]),  # noqa: E501
        Section("Main model", [*_main_blocks(main, fits.main_note, threshold, done, labels), *_lag_blocks(main_pair, per, level, labels)]),  # noqa: E501
        data_quality_section(
            data, [*exposures, *weather], exposures=exposures, date=options.get("date", "date"),
            units={e: request.unit_of(e) for e in exposures} | _weather_units(options), labels=labels,
        ),
    ]  # fmt: skip


def _weather_units(options: dict[str, Any]) -> dict[str, str]:
    """Units of the weather columns (temperature in °C, humidity in %), for Table 1 and axes."""
    units = {options.get("temperature"): "°C", options.get("humidity"): "%"}
    return {column: unit for column, unit in units.items() if column}


def _with_codes_missing(data: pd.DataFrame, fits: ReportFits, options: dict[str, Any]) -> pd.DataFrame:
    """``data`` with the declared missing-value codes set missing in the columns the successful fits read, so
    that the tables and figures describe the same values the models used (a -999 is never plotted)."""
    na_values = options.get("na_values") or ()
    if not na_values or not fits.done:
        return data
    date = options.get("date", "date")
    outcomes = list(dict.fromkeys(r.spec.outcome for r in fits.done))
    columns = list(dict.fromkeys(c for r in fits.done for c in r.spec.columns_used() if c != date))
    columns = [c for c in columns if c in data.columns and not isinstance(data[c].dtype, pd.CategoricalDtype)]
    dates = parse_dates(data, date, "data")
    return apply_na_values(data, columns, na_values, dates, counts=outcomes)


def report_content(
    data: pd.DataFrame,
    outcomes: Sequence[str] | str,
    exposures: Sequence[str] | str,
    lags: Sequence[Any],
    main_lag: Any = None,
    units: Mapping[str, str] | None = None,
    per: float = 10.0,
    level: float = 0.95,
    show_progress: bool = False,
    small_count_threshold: int | None = None,
    labels: Labels | None = None,
    **model_options: Any,
) -> ReportContent:
    """Fit and build the report's sections without writing anything; see :func:`write_report`.

    ``small_count_threshold`` decides what the figures of daily counts show (the tables are suppressed when
    written); give the writer the same threshold. ``labels``: display names (see :func:`write_report`).
    """
    labels = check_labels(labels)
    analyses, model_options = split_analyses(model_options)
    check_analyses(analyses, data)
    columns = [model_options.get(k) for k in ("date", "temperature", "humidity", "offset")]
    columns[0] = columns[0] or "date"
    request = check_request(
        data, outcomes, exposures, lags, main_lag, units, per, level, columns=columns, model_options=model_options
    )
    date_format = model_options.pop("date_format", None)
    if date_format is not None:  # read once, so the fits and the data sections see the same dates
        data = data.assign(**{columns[0]: parse_dates(data, columns[0], "data", date_format=date_format).to_numpy()})
    fits = fit_request(data, request, show_progress=show_progress, **model_options)
    effects = _effects(fits, request.per, request.level)
    described = _with_codes_missing(data, fits, model_options)
    sections = _sections(described, request, fits, effects, model_options, small_count_threshold, labels)
    if analyses:  # the further analyses of the main model, in the order asked (report/analysis_sections.py)
        sections[0].blocks.append(Text(methods_text(analyses)))
        main = MainModel(data, fits.main, {**model_options, "units": request.units}, tuple(request.lags), request.per,
                         request.level, small_count_threshold)  # fmt: skip
        sections[-1:-1] = analysis_sections(analyses, main)
    caution = CAUTION + (f" {BURDEN_CAUTION}" if analyses.value("burden") is not None else "")
    return ReportContent(sections, effects, fits.failures, fits.warnings, fits.main, caution)


def check_output_folder(out: str | Path) -> None:
    """Refuse an output path that is an existing file before any work is done (the report is a folder)."""
    path = Path(out)
    if path.exists() and not path.is_dir():
        raise DataError(f"the report goes into a folder, but {str(path)!r} is a file; give a folder path.")


def write_report(
    data: pd.DataFrame,
    outcomes: Sequence[str],
    exposures: Sequence[str],
    lags: Sequence[Any],
    out: str | Path,
    main_lag: Any = None,
    units: Mapping[str, str] | None = None,
    per: float = 10.0,
    small_count_threshold: int | None = None,
    *,
    level: float = 0.95,
    title: str | None = None,
    show_progress: bool = False,
    extra_sections: Sequence[Section] = (),
    labels: Labels | None = None,
    table_formats: str | Sequence[str] = ("csv",),
    **model_options: Any,
) -> Path:
    """Fit the outcomes × exposures × lag structures asked for and write an HTML report of them.

    Parameters
    ----------
    data : DataFrame
        One row per day (see :func:`airhealth.align_daily` to build it from separate tables). Not modified.
    outcomes, exposures : sequence of str
        Columns of daily counts and of daily exposure levels. Every combination is fitted.
    lags : sequence
        Lag structures (``"0"``, ``"0-1"``, ``"dl0-5"``, ``"dl0-21:spline4"`` or objects such as
        ``MovingAverage(0, 3, min_count=2)``).
    out : path
        Output folder: ``index.html``, ``tables/*.csv`` (and the other ``table_formats``), ``figures/*.png``.
    main_lag : str or LagStructure, optional
        The lag of the main model (default: the first of ``lags``). The main model is the first outcome and
        the first exposure at this lag: its fit is shown against the data, with its dropped days, its aliased
        columns and notes, and the per-lag effects of the distributed lags.
    units : mapping, optional
        Unit of each exposure, e.g. ``{"o3": "ppb"}`` (default µg/m³); carried into every label, table, axis
        and the ``unit`` column of the effects table.
    per : float
        Exposure increase for the relative risks (default 10).
    small_count_threshold : int, optional
        Health counts from 1 to this threshold − 1 are suppressed in the report (local disclosure rules).
    level : float
        Confidence level of the intervals (default 0.95).
    title : str, optional
        Page heading.
    show_progress : bool
        Report progress on stderr.
    extra_sections : sequence of Section
        Further sections appended to the report (the demo's hourly monitoring data).
    labels : mapping, optional
        Display names of outcomes, exposures and columns in the tables and figures, e.g.
        ``{"deaths_all": "All-cause deaths"}``; the data and the full-precision CSV keep the names.
    table_formats : str or sequence of {"csv", "md", "html", "tex", "docx"}
        Formats of every table under ``out/tables/`` (the CSV is always written), e.g. ``"csv,md,tex,docx"``;
        see :func:`airhealth.report.export.export_table`.
    **model_options
        Any :class:`~airhealth.model.spec.ModelSpec` option (``temperature``, ``trend_df_per_year``,
        ``humidity``, ``family``, ``na_values``, ...), and the further analyses of the main model, each a
        section in the order given (:mod:`airhealth.report.analysis_sections`): ``diagnostics=True``,
        ``robustness=True`` (or df per year values), ``sensitivity=True`` (or checks),
        ``copollutant_check=["no2"]``, ``effect_modifier="season"``, ``burden="who-guideline:pm2.5:24h"``
        (or a level), ``compare_designs=True``.

    Returns
    -------
    Path
        The path of ``index.html``.

    Raises
    ------
    SpecificationError
        For a bad argument (a lag not understood, a main lag not among ``lags``, a unit for a column that is
        not an exposure, ...).
    DataError
        For a column that does not exist, or when no analysis at all could be completed (the message lists
        each failure). An analysis that fails while others succeed does not raise: it is listed in the report
        under "Analyses that could not be completed", with its message.

    Examples
    --------
    >>> import airhealth, tempfile
    >>> path = airhealth.write_report(airhealth.load_sample(), outcomes=["deaths_all"], exposures=["pm25"],
    ...                               lags=["0", "0-1"], out=tempfile.mkdtemp(),
    ...                               temperature="temperature")  # doctest: +SKIP
    """
    check_request(data, outcomes, exposures, lags, main_lag, units, per, level, small_count_threshold)
    check_output_folder(out)
    check_labels(labels)
    formats = parse_formats(table_formats)
    content = report_content(
        data, outcomes, exposures, lags, main_lag=main_lag, units=units, per=per, level=level,
        show_progress=show_progress, small_count_threshold=small_count_threshold, labels=labels, **model_options,
    )  # fmt: skip
    return write_content(content, out, title, small_count_threshold, extra_sections, formats, labels)


def write_content(
    content: ReportContent,
    out: str | Path,
    title: str | None = None,
    small_count_threshold: int | None = None,
    extra_sections: Sequence[Section] = (),
    table_formats: str | Sequence[str] = ("csv",),
    labels: Labels | None = None,
) -> Path:
    """Write built report content as HTML (see :func:`write_report`)."""
    outcomes = ", ".join(display_name(o, labels) for o in dict.fromkeys(content.effects["outcome"]))
    heading = title or f"Short-term effects of air pollution on daily {outcomes}"
    return write_html_report(
        [*content.sections, *extra_sections], out, title=heading, small_count_threshold=small_count_threshold,
        table_formats=table_formats, labels=labels, caution=content.caution,
    )  # fmt: skip
