"""Sensitivity analyses: the main model refitted under alternative settings; one tidy row per setting.

A reviewer's questions about one estimate — does it survive more or less control of season and trend, of
temperature, humidity or holidays, the removal of the most polluted days or of an unusual period (an
epidemic, a heat wave)? — each become refits of the main model with one thing changed:

* **a model option** (``trend_df_per_year``, ``temperature_df``, ``temperature_lags``, ``humidity``,
  ``holidays`` or any other :class:`~airhealth.model.spec.ModelSpec` option) over a list of values, fitted
  by :func:`airhealth.studies.sweep.sweep_results` (the engine of ``sweep``, which fits each value as
  :func:`airhealth.fit` does);
* **the most extreme exposure days left out** (``exclude_above_percentile``): days whose exposure as it
  enters the model (the single day's or the moving average's value; for a distributed lag, the highest
  daily value of the window) is above the given percentile of that exposure over the days the main model
  uses (``numpy.percentile``, linear interpolation);
* **named periods left out** (``exclude_periods``), each period on its own.

Days are left out by making their outcome missing on the validated calendar, so the confounder bases
(knots of the time and weather splines) stay those of the main model and only the days change; each such
row equals :func:`airhealth.fit` on the data with those days' outcome missing. QAIC is comparable only
between rows fitted on the same days (a df sweep of the time spline); the exclusions and the temperature
lag window change the days.

A setting that cannot be fitted (e.g. so many df that too few days remain per parameter) keeps its row with
missing numbers and the single fit's error message in ``error`` (and a warning names it); the other rows
are still computed. The main model must fit: its error is raised.

References
----------
Peng RD, Dominici F, Louis TA (2006). Model choice in time series studies of air pollution and mortality.
J R Stat Soc A 169:179–203 (sensitivity of the estimate to the df of the time spline).
Bhaskaran K, Gasparrini A, Hajat S, Smeeth L, Armstrong B (2013). Time series regression studies in
environmental epidemiology. Int J Epidemiol 42:1187–1195 (sensitivity analyses of the standard model).
"""

from __future__ import annotations

import numbers
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from .._warn import warn_user
from ..errors import AirhealthError, DataWarning, SpecificationError
from ..model.design import model_frame
from ..model.fitting import fit_spec
from ..model.group_effects import require_one_effect
from ..model.result import FitResult
from ..model.spec import ModelSpec
from ..prep.align import restrict_period
from ..prep.lags import lag_matrix
from ._rows import outcome_only_on
from .sweep import sweep_results

__all__ = ["DEFAULT_TIME_DF", "SENSITIVITY_COLUMNS", "default_checks", "sensitivity"]

#: Columns of the sensitivity table, in order.
SENSITIVITY_COLUMNS = [
    "check", "setting", "is_main", "outcome", "exposure", "lag", "per", "unit", "coef", "se", "rr", "rr_low",
    "rr_high", "percent_change", "p_value", "dispersion", "qaic", "n_days", "n_excluded", "error",
]  # fmt: skip
_FROM_RESULT = SENSITIVITY_COLUMNS[3:18]

#: df per year of the time spline tried by default (common practice, no source: Peng et al. 2006 show
#: estimates over 1–16 df/year; 4–12 brackets the usual choices of 4–8 and of the multi-city studies).
DEFAULT_TIME_DF = (4, 6, 8, 10, 12)
#: Default percentile above which exposure days are left out (the 99th; common practice, no source).
DEFAULT_PERCENTILE = 99.0
EXCLUDE_ABOVE = "exclude_above_percentile"
EXCLUDE_PERIODS = "exclude_periods"
MAIN = "main"


def default_checks(spec: ModelSpec) -> dict[str, Any]:
    """The checks run when none are named, for the main model ``spec``.

    Time df per year 4, 6, 8, 10, 12; with temperature, its spline with 3 and 9 df and its lag window
    1–7; with humidity or holidays in the main model, the model without them; and the days above the
    99th percentile of the exposure left out.
    """
    checks: dict[str, Any] = {}
    if spec.seasonality == "spline":
        checks["trend_df_per_year"] = list(DEFAULT_TIME_DF)
    if spec.temperature is not None:
        checks["temperature_df"] = [3, 9]
        checks["temperature_lags"] = [(1, 7)]
    if spec.humidity is not None:
        checks["humidity"] = [None]
    if spec.holidays is not None:
        checks["holidays"] = [None]
    checks[EXCLUDE_ABOVE] = DEFAULT_PERCENTILE
    return checks


def _as_values(name: str, given: Any) -> list[Any]:
    """A check's values: a list (or range, array) of values, or one value (a tuple is one value)."""
    values = list(given) if isinstance(given, list | range | np.ndarray | pd.Series) else [given]
    if not values:
        raise SpecificationError(
            f"the sensitivity check {name!r} has an empty list of values; give at least one, e.g. "
            f"{{{name!r}: [4, 6, 8]}}, or leave the check out."
        )
    return values


def _setting_text(option: str, value: Any) -> str:
    """How one value of a model option reads in the table and the figure."""
    if option == "trend_df_per_year":
        return f"{value:g} df/year"
    if option in ("temperature_df", "temperature_lag_df", "humidity_df"):
        return f"{value} df"
    if option == "temperature_lags":
        return "no lagged temperature term" if value is None else f"mean of lags {value[0]}-{value[1]}"
    if option in ("humidity", "holidays"):
        return f"without {option}" if value is None else f"with {option} ({value})"
    return "none" if value is None else str(value)


def _result_row(check: str, setting: str, is_main: bool, result: FitResult, per: float, level: float) -> dict:
    record = result.to_dict(per=per, level=level)
    return {"check": check, "setting": setting, "is_main": is_main, **{c: record[c] for c in _FROM_RESULT}}


def _error_row(check: str, setting: str, main: FitResult, per: float, error: AirhealthError) -> dict:
    spec = main.spec
    return {
        "check": check, "setting": setting, "is_main": False, "outcome": spec.outcome, "exposure": spec.exposure,
        "lag": spec.lag.label, "per": per, "unit": spec.unit, "error": str(error),
    }  # fmt: skip


def _option_rows(
    data: pd.DataFrame, main: FitResult, option: str, values: list[Any], options: dict, per: float, level: float,
    show_progress: bool = False,
) -> list[dict]:  # fmt: skip
    """One row per value of a model option, fitted through the sweep engine (failures kept)."""
    rest = {k: v for k, v in options.items() if k != option}
    rows = []
    for value, outcome in sweep_results(data, option, values, "keep", show_progress, **rest):
        text = _setting_text(option, value)
        if isinstance(outcome, AirhealthError):
            rows.append(_error_row(option, text, main, per, outcome))
        else:
            is_main = ModelSpec.from_options(**{**rest, option: value}) == ModelSpec.from_options(**options)
            rows.append(_result_row(option, text, is_main, outcome, per, level))
    return rows


def _checked_percentile(value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, numbers.Real) or not 0 < float(value) < 100:
        raise SpecificationError(
            f"{EXCLUDE_ABOVE} must be a percentile strictly between 0 and 100 (e.g. 99 leaves out the days "
            f"above the 99th percentile of the exposure), got {value!r}."
        )
    return float(value)


def _exposure_as_entered(frame: pd.DataFrame, spec: ModelSpec) -> np.ndarray:
    """The exposure as it enters the model on each day (for a distributed lag: the window's highest day)."""
    raw = frame[spec.exposure].to_numpy(dtype=float, na_value=np.nan)
    if not spec.lag.is_distributed:
        return spec.lag.columns(raw)[:, 0]
    window = lag_matrix(raw, spec.lag.lags)
    highest = np.full(window.shape[0], np.nan)
    complete = np.isfinite(window).all(axis=1)
    highest[complete] = window[complete].max(axis=1)
    return highest


def _fit_without(
    check: str, setting: str, frame: pd.DataFrame, main: FitResult, drop: np.ndarray, per: float, level: float
) -> dict:
    """The main model on the days not in ``drop``; a failure keeps the row with its message."""
    spec = main.spec if main.spec.date_format is None else main.spec.replace(date_format=None)  # dates parsed
    try:
        result = fit_spec(outcome_only_on(frame, main.spec.outcome, ~drop), spec)
    except AirhealthError as error:
        row = _error_row(check, setting, main, per, error)
    else:
        row = _result_row(check, setting, False, result, per, level)
    row["n_excluded"] = int(drop.sum())
    return row


def _extreme_rows(frame: pd.DataFrame, main: FitResult, given: Any, per: float, level: float) -> list[dict]:
    spec = main.spec
    metric = _exposure_as_entered(frame, spec)
    used = pd.DatetimeIndex(frame[spec.date]).isin(main.fitted.index)
    rows = []
    for value in _as_values(EXCLUDE_ABOVE, given):
        percentile = _checked_percentile(value)
        threshold = float(np.percentile(metric[used], percentile))
        drop = used & (metric > threshold)
        setting = f"days above the {percentile:g}th percentile ({threshold:.4g} {spec.unit})"
        rows.append(_fit_without(EXCLUDE_ABOVE, setting, frame, main, drop, per, level))
    return rows


def _period_days(frame: pd.DataFrame, spec: ModelSpec, periods: Any) -> dict[str, pd.DatetimeIndex]:
    """Each named period's days on the calendar, checked as :func:`~airhealth.prep.align.restrict_period` checks
    a period (ISO bounds, end not before start, some day of the data inside); overlapping periods are refused."""
    if not isinstance(periods, Mapping) or not periods:
        raise SpecificationError(
            f"{EXCLUDE_PERIODS} must be a non-empty mapping of name to (start, end), e.g. "
            f"{{'epidemic': ('2012-01-10', '2012-02-20')}}; got {periods!r}."
        )
    days: dict[str, pd.DatetimeIndex] = {}
    for name, bounds in periods.items():
        if isinstance(bounds, str) or not isinstance(bounds, Sequence) or len(bounds) != 2:
            raise SpecificationError(
                f"exclusion period {name!r} must be a pair (start, end) of ISO dates, e.g. "
                f"('2012-01-10', '2012-02-20'); got {bounds!r}."
            )
        try:
            inside = restrict_period(frame[[spec.date]], bounds[0], bounds[1], spec.date, what="the data")
        except AirhealthError as error:
            raise type(error)(f"exclusion period {name!r}: {error}") from None
        days[str(name)] = pd.DatetimeIndex(inside[spec.date])
    _check_no_overlap(days)
    return days


def _check_no_overlap(days: dict[str, pd.DatetimeIndex]) -> None:
    names = list(days)
    for i, first in enumerate(names):
        for second in names[i + 1 :]:
            common = days[first].intersection(days[second])
            if len(common):
                raise SpecificationError(
                    f"exclusion periods {first!r} and {second!r} overlap on {len(common)} days "
                    f"({common[0]:%Y-%m-%d} to {common[-1]:%Y-%m-%d}); each period is left out on its own, so "
                    "give periods that do not overlap (or merge them into one)."
                )


def _period_rows(frame: pd.DataFrame, main: FitResult, periods: Any, per: float, level: float) -> list[dict]:
    dates = pd.DatetimeIndex(frame[main.spec.date])
    rows = []
    for name, days in _period_days(frame, main.spec, periods).items():
        setting = f"{name} ({days[0]:%Y-%m-%d} to {days[-1]:%Y-%m-%d})"
        rows.append(_fit_without(EXCLUDE_PERIODS, setting, frame, main, dates.isin(days), per, level))
    return rows


def _checked_checks(checks: Mapping[str, Any] | None, spec: ModelSpec) -> dict[str, Any]:
    if checks is None:
        return default_checks(spec)
    if not isinstance(checks, Mapping) or not checks:
        raise SpecificationError(
            "checks must be a non-empty mapping of check to values, e.g. {'trend_df_per_year': [4, 6, 8], "
            "'exclude_above_percentile': 99}; or None for the default checks."
        )
    valid = set(ModelSpec.__dataclass_fields__) - {"outcome", "exposure", "date"}
    for name in checks:
        if name not in valid | {EXCLUDE_ABOVE, EXCLUDE_PERIODS}:
            raise SpecificationError(
                f"unknown sensitivity check {name!r}; use {EXCLUDE_ABOVE!r}, {EXCLUDE_PERIODS!r} or a model "
                f"option: {', '.join(sorted(valid))}."
            )
    return dict(checks)


def sensitivity(
    data: pd.DataFrame,
    outcome: str,
    exposure: str,
    lag: Any = "0-1",
    checks: Mapping[str, Any] | None = None,
    per: float = 10.0,
    level: float = 0.95,
    show_progress: bool = False,
    **model_options: Any,
) -> pd.DataFrame:
    """Refit the main model under alternative settings; one tidy row per setting.

    Parameters
    ----------
    data : DataFrame
        Daily data, as for :func:`airhealth.fit`.
    outcome, exposure : str
        Columns of daily counts and of the pollutant.
    lag : str or LagStructure
        Lag of the main model (default ``"0-1"``).
    checks : mapping or None
        What to vary, by name: any model option with a list of values (or one value; a tuple is one value),
        e.g. ``{"trend_df_per_year": [4, 6, 8, 10, 12], "temperature_df": [3, 9], "temperature_lags":
        [(1, 7)], "humidity": [None]}`` (``None`` leaves a term out; a column name adds humidity);
        ``"exclude_above_percentile"``: a percentile in (0, 100) or a list of them; ``"exclude_periods"``:
        ``{"epidemic": ("2012-01-10", "2012-02-20"), ...}`` (ISO dates, both included; each period left
        out on its own; periods must lie in the data and not overlap). ``None`` (default): the checks of
        :func:`default_checks`.
    per, level : float
        Exposure increase for the relative risks and the confidence level.
    show_progress : bool
        Report the progress of each check's refits on stderr.
    **model_options
        Further options of the main model (``temperature``, ``humidity``, ``holidays``, ...), as for
        :func:`airhealth.fit`.

    Returns
    -------
    DataFrame
        Columns ``check`` (``"main"``, the option's name, ``"exclude_above_percentile"`` or
        ``"exclude_periods"``), ``setting`` (plain text), ``is_main`` (the setting is the main model's),
        ``outcome, exposure, lag, per, unit, coef, se, rr, rr_low, rr_high, percent_change, p_value,
        dispersion, qaic, n_days``, ``n_excluded`` (days left out by an exclusion) and ``error`` (the message
        of a setting that could not be fitted, whose numbers are then missing). The first row is the main
        model. Relative risks are associations, not proof of causation.

    Raises
    ------
    SpecificationError
        A non-linear exposure-response lag (no single relative risk), an unknown check, an empty list of
        values, a percentile outside (0, 100), a period that is not a pair of ISO dates, ends before it
        starts or overlaps another.
    DataError
        A period with no day in the data (the message gives the dates the data cover); the main model's own
        data errors.

    Warns
    -----
    DataWarning
        When some settings could not be fitted (their rows hold the message).

    Examples
    --------
    >>> import airhealth
    >>> table = airhealth.sensitivity(airhealth.load_sample(), outcome="deaths_all", exposure="pm25",
    ...                               temperature="temperature", checks={"trend_df_per_year": [4, 10]})
    >>> list(table["setting"])
    ['main model', '4 df/year', '10 df/year']
    """
    options = {"outcome": outcome, "exposure": exposure, "lag": lag, **model_options}
    spec = ModelSpec.from_options(**options)
    require_one_effect(spec.modifier, "sensitivity")
    if checks is not None and "modifier" in checks:
        for value in _as_values("modifier", checks["modifier"]):
            require_one_effect(value, "sensitivity")
    if getattr(spec.lag, "is_nonlinear", False):
        raise SpecificationError(
            f"sensitivity compares one relative risk per setting, and lag {spec.lag.label!r} is a non-linear "
            "exposure-response term with none; use a single-day, moving-average or distributed lag."
        )
    wanted = _checked_checks(checks, spec)
    for name, given in wanted.items():  # every value checked before anything is fitted
        for value in [] if name == EXCLUDE_PERIODS else _as_values(name, given):
            if name == EXCLUDE_ABOVE:
                _checked_percentile(value)
            else:
                ModelSpec.from_options(**{**options, name: value})
    main = fit_spec(data, spec)
    rows = [_result_row(MAIN, "main model", True, main, per, level)]
    frame = model_frame(data, spec) if {EXCLUDE_ABOVE, EXCLUDE_PERIODS} & set(wanted) else None
    for name, given in wanted.items():
        if name == EXCLUDE_ABOVE:
            rows += _extreme_rows(frame, main, given, per, level)
        elif name == EXCLUDE_PERIODS:
            rows += _period_rows(frame, main, given, per, level)
        else:
            rows += _option_rows(data, main, name, _as_values(name, given), options, per, level, show_progress)
    table = pd.DataFrame(rows, columns=SENSITIVITY_COLUMNS)
    table["n_excluded"] = table["n_excluded"].fillna(0).astype(int)
    failed = table[table["error"].notna()]
    if len(failed):
        shown = "; ".join(f"{r.check} = {r.setting}: {r.error}" for r in failed.itertuples())
        warn_user(f"{len(failed)} of {len(table)} sensitivity settings could not be fitted — {shown}", DataWarning)
    return table
