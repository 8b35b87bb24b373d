"""The one-city report for the user's own data: the outcomes, exposures and lag structures asked for, and no more.

:func:`write_report` fits every outcome × exposure × lag structure, builds the report sections and writes
them as HTML with CSV tables and PNG figures (``airhealth report`` on the command line; ``airhealth demo``
runs it on the bundled sample). An outcome or exposure whose data fail (no events, a constant series, a
lag window that leaves too few days, ...) is listed in the report with its error, and the rest completes.
"""

from __future__ import annotations

import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from .._progress import progress
from .._warn import warn_user
from ..errors import AirhealthError, AirhealthWarning, DataError, SpecificationError
from ..model.compare import compare_results
from ..model.lag_structures import parse_lag
from ..model.spec import DEFAULT_UNIT, ModelSpec
from ..prep.describe import table_one
from ..prep.validate import require_columns
from .data_quality_section import data_quality_section
from .document import Figure, Section, Table, Text
from .html import write_html_report
from .lag_plots import plot_lag_response
from .plots import plot_effects, plot_observed_fitted
from .tables import effects_table, format_effects

__all__ = ["ReportContent", "count_summary", "describe_model", "report_content", "write_report"]

_FAMILY = {
    "quasipoisson": "Quasi-Poisson",
    "poisson": "Poisson",
    "negbin": "Negative binomial",
}


def describe_model(
    spec: ModelSpec, n_calendar: int, per: float = 10.0, unit: str = DEFAULT_UNIT, level: float = 0.95
) -> str:
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
        + f". Relative risks are per {per:g} {unit} with {level:.0%} Wald intervals; single-day lags use the "
        "exposure of that day, moving averages the mean of the days shown, distributed lags the sum of the "
        "effects of every lag day (the cumulative effect)."
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


@dataclass
class ReportContent:
    """What a report holds before it is written: sections, the effects table and what could not be done."""

    sections: list[Section]
    effects: pd.DataFrame
    failures: pd.DataFrame  # outcome, exposure, lag, error
    warnings: pd.DataFrame  # outcome, exposure, warning
    main: Any  # the FitResult of the main model


# -- arguments ---------------------------------------------------------------------------------------------


def _names(values: Sequence[str] | str, what: str) -> list[str]:
    names = [values] if isinstance(values, str) else list(values)
    if not names or not all(isinstance(v, str) and v for v in names):
        raise SpecificationError(f"{what} must be a list of column names, got {values!r}.")
    repeated = [v for v in names if names.count(v) > 1]
    if repeated:
        raise SpecificationError(f"{what} names {repeated[0]!r} twice; give each column once.")
    return names


def _lags(lags: Sequence[Any], main_lag: Any) -> tuple[list[Any], int]:
    """The lag structures (parsed, each with a unique label) and the position of the main one."""
    given = [lags] if isinstance(lags, str) else list(lags)
    if not given:
        raise SpecificationError("lags is empty; give at least one lag structure, e.g. lags=['0-1'].")
    parsed = [parse_lag(lag) for lag in given]
    labels = [p.label for p in parsed]
    repeated = [lab for lab in labels if labels.count(lab) > 1]
    if repeated:
        raise SpecificationError(f"lag {repeated[0]!r} is given twice; give each lag structure once.")
    if main_lag is None:
        return parsed, 0
    main = parse_lag(main_lag)
    for i, (text, lag) in enumerate(zip(given, parsed, strict=True)):
        if lag == main or (isinstance(main_lag, str) and main_lag.strip().lower() == str(text).strip().lower()):
            return parsed, i
    raise SpecificationError(f"the main lag {main.label!r} is not among the lags asked for ({', '.join(labels)}).")


def _units(units: Mapping[str, str] | None, exposures: list[str]) -> dict[str, str]:
    if units is None:
        return {}
    if not isinstance(units, Mapping):
        raise SpecificationError(
            f"units must be a mapping of exposure column to unit, e.g. {{'o3': 'ppb'}}; got {units!r}."
        )
    unknown = [c for c in units if c not in exposures]
    if unknown:
        raise SpecificationError(
            f"a unit is given for {unknown[0]!r}, which is not one of the exposures ({', '.join(exposures)})."
        )
    return dict(units)


def _check_arguments(per: float, level: float, threshold: int | None) -> None:
    if isinstance(per, bool) or not isinstance(per, int | float) or not per > 0:
        raise SpecificationError(f"per must be a positive number of exposure units, got {per!r}.")
    if isinstance(level, bool) or not isinstance(level, int | float) or not 0 < level < 1:
        raise SpecificationError(f"level must be a confidence level between 0 and 1 (e.g. 0.95), got {level!r}.")
    if threshold is not None and (isinstance(threshold, bool) or not isinstance(threshold, int) or threshold < 1):
        raise SpecificationError(f"small_count_threshold must be a whole number >= 1 or None, got {threshold!r}.")


# -- fitting -----------------------------------------------------------------------------------------------


def _fit_pair(data: pd.DataFrame, lags: list[Any], options: dict[str, Any]) -> tuple[list[Any], list[tuple], list]:
    """Fit every lag for one outcome and exposure; a failing lag is retried alone so the others complete.

    Returns (results or None per lag, failures as (lag label, message), warnings caught).
    """
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            return compare_results(data, lags, **options), [], list(caught)
        except AirhealthError as exc:
            if len(lags) == 1:
                return [None], [(lags[0].label, str(exc))], list(caught)
    results, failures, seen = [], [], list(caught)
    for lag in lags:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                results.extend(compare_results(data, [lag], **options))
            except AirhealthError as exc:
                results.append(None)
                failures.append((lag.label, str(exc)))
        seen.extend(caught)
    return results, failures, seen


def _fit_all(
    data: pd.DataFrame, outcomes: list[str], exposures: list[str], lags: list[Any], options: dict[str, Any], show: bool
) -> tuple[dict[tuple[str, str], list[Any]], pd.DataFrame, pd.DataFrame]:
    """Fit every outcome × exposure; returns results per pair, the failures and the warnings (as tables)."""
    fits, failed, warned = {}, [], []
    pairs = [(o, e) for o in outcomes for e in exposures]
    for outcome, exposure in progress(pairs, label="outcome × exposure", enabled=show):
        results, failures, caught = _fit_pair(data, lags, {**options, "outcome": outcome, "exposure": exposure})
        fits[(outcome, exposure)] = results
        if len(failures) == len(lags) and len({m for _, m in failures}) == 1:
            failures = [("all", failures[0][1])]
        failed += [{"outcome": outcome, "exposure": exposure, "lag": lag, "error": msg} for lag, msg in failures]
        for w in caught:
            record = {"outcome": outcome, "exposure": exposure, "warning": str(w.message)}
            if record not in warned:
                if issubclass(w.category, AirhealthWarning):  # the report lists airhealth's own warnings
                    warned.append(record)
                warn_user(f"{outcome} and {exposure}: {w.message}", w.category)
    return (
        fits,
        pd.DataFrame(failed, columns=["outcome", "exposure", "lag", "error"]),
        pd.DataFrame(warned, columns=["outcome", "exposure", "warning"]),
    )


def _main_result(
    fits: dict[tuple[str, str], list[Any]], pair: tuple[str, str], index: int, label: str
) -> tuple[Any, str]:
    """The main model (first outcome and exposure at the main lag), or else the first fit that worked."""
    if fits[pair][index] is not None:
        return fits[pair][index], ""
    at_lag = [results[index] for results in fits.values() if results[index] is not None]
    found = (at_lag or [r for results in fits.values() for r in results if r is not None])[0]
    spec = found.spec
    return found, (
        f"The main model asked for ({pair[0]}, {pair[1]}, lag {label}) could not be fitted (see 'Analyses that "
        f"could not be completed'); the model checks below show {spec.outcome}, {spec.exposure}, lag "
        f"{spec.lag.label} instead."
    )


# -- sections ----------------------------------------------------------------------------------------------


def _unit_of(exposure: str, units: dict[str, str]) -> str:
    return units.get(exposure, DEFAULT_UNIT)


def _unit_text(exposures: Sequence[str], units: dict[str, str]) -> str:
    """The one unit of ``exposures``, or words saying that they differ."""
    used = {_unit_of(e, units) for e in exposures}
    return used.pop() if len(used) == 1 else "units of each exposure (see the 'per' column)"


def _per_text(per: float, exposures: Sequence[str], units: dict[str, str]) -> str:
    return f"{per:g} {_unit_text(exposures, units)}"


def _effects_tables(table: pd.DataFrame, per: float, level: float, units: dict[str, str]) -> list[Any]:
    shown = format_effects(table).rename(columns={"RR (95% CI)": f"RR ({level:.0%} CI)"})
    shown.insert(3, "per", [f"{per:g} {_unit_of(e, units)}" for e in table["exposure"]])
    exposures = list(dict.fromkeys(table["exposure"]))
    return [
        Table(
            f"Relative risks per {_per_text(per, exposures, units)}",
            shown,
            "effects",
            note="Each row is a separate model for one outcome, exposure and lag. QAIC compares models fitted on "
            "the same days only: rows with different day counts are not comparable.",
        ),
        Table("Estimates at full precision", table, "effects_full", display=False),
    ]


def _forest_figures(table: pd.DataFrame, per: float, level: float, units: dict[str, str]) -> list[Figure]:
    """One forest plot per outcome, rows labelled by exposure (with its unit) and lag."""
    figures = []
    for outcome, rows in table.groupby("outcome", sort=False):
        exposures = list(dict.fromkeys(rows["exposure"]))
        single = len({_unit_of(e, units) for e in exposures}) == 1
        labels = [
            f"{r.exposure} · lag {r.lag}" + ("" if single else f" (per {per:g} {_unit_of(r.exposure, units)})")
            for r in rows.itertuples()
        ]
        per_label = _per_text(per, exposures, units) if single else f"{per:g} units"
        ax = plot_effects(rows, labels=labels, per_label=per_label)
        ax.set_xlabel(f"relative risk per {per_label} ({level:.0%} CI)")
        ax.set_title(str(outcome))
        title = f"{outcome}: relative risks per {_per_text(per, exposures, units)} with {level:.0%} intervals"
        figures.append(Figure(title, ax.figure, f"effects_forest_{outcome}"))
    return figures


def _main_blocks(main: Any, replaced: str) -> list[Any]:
    spec = main.spec
    name = f"{spec.outcome}, {spec.exposure} ({spec.unit}), lag {spec.lag.label}"
    blocks: list[Any] = [Text(replaced or f"The main model is {name}.")]
    if main.aliased:
        blocks.append(
            Text(
                "Columns of the confounder model with no support among the days used were dropped (aliased), as "
                f"R's glm does: {', '.join(main.aliased)}."
            )
        )
    blocks += [Text(f"Note: {note}") for note in main.notes]
    blocks += [
        Figure(
            f"Observed and fitted daily {spec.outcome} ({name})", plot_observed_fitted(main).figure, "observed_fitted"
        ),
        Table(
            "Days left out of the main model",
            main.drop_summary().rename_axis("reason").reset_index(),
            "dropped_days",
        ),
    ]
    return blocks


def _lag_blocks(results: list[Any], per: float, level: float) -> list[Any]:
    """Per-lag effects and lag-response figures of the distributed lags of the main outcome and exposure."""
    distributed = [r for r in results if r is not None and r.spec.lag.is_distributed]
    if not distributed:
        return []
    frames = [r.lag_effects(per=per, level=level).assign(lag_structure=r.spec.lag.label) for r in distributed]
    table = pd.concat(frames, ignore_index=True)[["lag_structure", "lag", "coef", "se", "rr", "rr_low", "rr_high"]]
    blocks: list[Any] = [Table("Per-lag effects of the distributed lags", table, "lag_effects")]
    for r in distributed:
        ax = plot_lag_response(r, per=per, level=level)
        ax.set_ylabel(f"RR per {per:g} {r.spec.unit}")
        name = "lag_response_" + "".join(ch if ch.isalnum() else "_" for ch in r.spec.lag.label)
        title = f"{r.spec.exposure}: relative risk per {per:g} {r.spec.unit} at each lag, {r.spec.lag.label}"
        blocks.append(Figure(title, ax.figure, name))
    return blocks


def _problem_sections(failures: pd.DataFrame, caught: pd.DataFrame) -> list[Section]:
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


def _asked_text(outcomes: list[str], exposures: list[str], lags: list[Any], units: dict[str, str], main: Any) -> str:
    with_units = ", ".join(f"{e} ({_unit_of(e, units)})" for e in exposures)
    return (
        f"Outcomes: {', '.join(outcomes)}. Exposures: {with_units}. Lag structures: "
        f"{', '.join(lag.label for lag in lags)}. Main model: {main.spec.outcome}, {main.spec.exposure}, lag "
        f"{main.spec.lag.label}."
    )


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
    **model_options: Any,
) -> ReportContent:
    """Fit and build the report's sections without writing anything; see :func:`write_report`."""
    outcomes, exposures = _names(outcomes, "outcomes"), _names(exposures, "exposures")
    both = [c for c in outcomes if c in exposures]
    if both:
        raise SpecificationError(f"column {both[0]!r} is given both as an outcome and as an exposure.")
    parsed, main_index = _lags(lags, main_lag)
    units = _units(units, exposures)
    _check_arguments(per, level, None)
    extra = [model_options.get(k) for k in ("temperature", "humidity", "offset")]
    require_columns(data, [model_options.get("date", "date"), *outcomes, *exposures, *extra], "data")
    options = {**model_options, "units": units}
    fits, failures, caught = _fit_all(data, outcomes, exposures, parsed, options, show_progress)
    done = [r for results in fits.values() for r in results if r is not None]
    if not done:
        listing = "; ".join(f"{r.outcome} and {r.exposure}: {r.error}" for r in failures.itertuples())
        raise DataError(f"no analysis could be completed, so no report was written. {listing}")
    main, replaced = _main_result(fits, (outcomes[0], exposures[0]), main_index, parsed[main_index].label)
    table = effects_table(done, per=per, level=level)
    table.insert(table.columns.get_loc("per") + 1, "unit", [r.spec.unit for r in done])
    ok_outcomes = list(dict.fromkeys(r.spec.outcome for r in done))
    ok_exposures = list(dict.fromkeys(r.spec.exposure for r in done))
    model_text = describe_model(main.spec, len(data), per, _unit_text(ok_exposures, units), level)
    sections = [
        Section("Analyses", [Text(_asked_text(outcomes, exposures, parsed, units, main)), Text(model_text)]),
        *_problem_sections(failures, caught),
        Section(
            "Daily health counts",
            [
                Table(
                    "Daily counts per outcome",
                    count_summary(data, ok_outcomes).round(2),
                    "daily_counts",
                    count_columns=("total", "min", "p25", "median", "p75", "max"),
                )
            ],
        ),
        Section(
            "Effect estimates", [*_effects_tables(table, per, level, units), *_forest_figures(table, per, level, units)]
        ),
        Section(
            "Main model",
            [*_main_blocks(main, replaced), *_lag_blocks(fits[(main.spec.outcome, main.spec.exposure)], per, level)],
        ),
    ]
    weather = [c for c in (model_options.get("temperature"), model_options.get("humidity")) if c]
    sections.append(
        data_quality_section(
            data, [*ok_exposures, *weather], exposures=ok_exposures, date=model_options.get("date", "date")
        )
    )
    return ReportContent(sections, table, failures, caught, main)


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
        Output folder: ``index.html``, ``tables/*.csv``, ``figures/*.png``.
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
    **model_options
        Any :class:`~airhealth.model.spec.ModelSpec` option (``temperature``, ``trend_df_per_year``,
        ``humidity``, ``family``, ``na_values``, ...).

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
    _check_arguments(per, level, small_count_threshold)
    content = report_content(
        data, outcomes, exposures, lags, main_lag=main_lag, units=units, per=per, level=level,
        show_progress=show_progress, **model_options,
    )  # fmt: skip
    return write_content(content, out, title, small_count_threshold, extra_sections)


def write_content(
    content: ReportContent,
    out: str | Path,
    title: str | None = None,
    small_count_threshold: int | None = None,
    extra_sections: Sequence[Section] = (),
) -> Path:
    """Write built report content as HTML (see :func:`write_report`)."""
    outcomes = ", ".join(dict.fromkeys(content.effects["outcome"]))
    heading = title or f"Short-term effects of air pollution on daily {outcomes}"
    return write_html_report(
        [*content.sections, *extra_sections], out, title=heading, small_count_threshold=small_count_threshold
    )
