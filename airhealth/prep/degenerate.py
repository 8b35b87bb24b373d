"""Data that cannot support a model: errors instead of results.

An outcome with no events, constant counts, an exposure that never varies, an exposure measured in one
season only, or a model with more parameters than the days can carry all "fit": the engine returns numbers
(a relative risk of 1.0000, a dispersion of 7e-26, a QAIC of 6e33) that mean nothing. Each case here is a
:class:`~airhealth.errors.DataError` naming the column, the values and dates concerned and what to do.

Two scopes use the same checks: the whole daily frame (:func:`check_series`, before any model is built) and
the days a particular model can use (:func:`check_usable_days`, which also knows the number of parameters).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd

from ..errors import DataError
from .validate import _fmt_dates

__all__ = [
    "MIN_DAYS_PER_PARAMETER",
    "check_empty",
    "check_exposure_varies",
    "check_one_season",
    "check_outcome_varies",
    "check_series",
    "check_usable_days",
]

#: Fewest usable days per model parameter. Rules of thumb for regression ask for 10–20 observations per
#: parameter to avoid an over-fitted model (Harrell FE, 2015, Regression Modeling Strategies, 2nd ed.,
#: Springer, section 4.4; from memory); we take the lower end. The standard model (7 df per year of time,
#: two temperature splines of 6 df, day of week) has about 14 days per parameter on one year of data and
#: 40 on fourteen years, so only models far richer than their data are refused.
MIN_DAYS_PER_PARAMETER = 10

#: Months without exposure data, every year, for the "one season" error (common practice, no source: one
#: missing month a year is a gap, two or more every year are a season).
MIN_EMPTY_MONTHS = 2

#: A month is "without exposure" when the exposure is present on fewer than this share of its days that
#: have the outcome (common practice, no source; tolerates stray start-up days of a seasonal monitor).
EMPTY_MONTH_COVERAGE = 0.05

_MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")


def _span(dates: pd.DatetimeIndex) -> str:
    return f"{dates.min():%Y-%m-%d} to {dates.max():%Y-%m-%d}" if len(dates) else "no days"


def check_empty(frame: pd.DataFrame, what: str = "data") -> None:
    """Raise if ``frame`` has no rows (e.g. a file with a header only)."""
    if len(frame) == 0:
        columns = ", ".join(str(c) for c in frame.columns[:10])
        raise DataError(
            f"{what} has no rows (columns: {columns or 'none'}); a file with only a header line has no days to "
            "analyse. Check the file or the filter that produced the table."
        )


def check_outcome_varies(y: np.ndarray, column: str, dates: pd.DatetimeIndex, scope: str) -> None:
    """Raise if the outcome has no events or the same count on every day of ``scope``.

    ``y`` and ``dates`` cover only the days concerned; ``scope`` describes them for the message.
    """
    v = y[np.isfinite(y)]
    if not v.size:
        return
    if np.all(v == 0):
        raise DataError(
            f"outcome column {column!r} has no events: it is 0 on all {v.size} {scope} ({_span(dates)}). A "
            "model of daily counts needs events; check the column (is it the right outcome, or a rate?)."
        )
    if np.all(v == v[0]):
        raise DataError(
            f"outcome column {column!r} has the same count, {v[0]:g}, on all {v.size} {scope} "
            f"({_span(dates)}); it carries no day-to-day variation to relate to the exposure. Check the column "
            "(a constant placeholder or a fill value?)."
        )


def check_exposure_varies(x: np.ndarray, column: str, dates: pd.DatetimeIndex, scope: str) -> None:
    """Raise if the exposure takes a single value on every day of ``scope`` where it is present."""
    v = x[np.isfinite(x)]
    if v.size and np.all(v == v[0]):
        raise DataError(
            f"exposure column {column!r} never varies: it is {v[0]:g} on all {v.size} {scope} with a value "
            f"({_span(dates)}), so its effect cannot be estimated. Check the column (a fill value, or the "
            "wrong column?)."
        )


def _month_names(months: list[int]) -> str:
    """``"Apr–Sep"`` for a run of consecutive months (wrapping over the new year), else a list."""
    ordered = sorted(months)
    if len(ordered) > 2:
        for start in ordered:  # find a rotation in which the months are consecutive
            run = [(start - 1 + k) % 12 + 1 for k in range(len(ordered))]
            if sorted(run) == ordered:
                return f"{_MONTHS[run[0] - 1]}–{_MONTHS[run[-1] - 1]}"
    return ", ".join(_MONTHS[m - 1] for m in ordered)


def check_one_season(
    exposure: np.ndarray, y: np.ndarray, dates: pd.DatetimeIndex, column: str, outcome: str, date: str = "date"
) -> None:
    """Raise if the exposure is measured only in some months of every year while the outcome is recorded
    all year (e.g. ozone monitored April–September).

    A year-round model of such data cannot separate the exposure from the season; the usual analysis
    keeps the months with exposure data and a time trend with fewer df. Needs at least two years with
    exposure data; a single long gap is left to the design's checks.

    Raises
    ------
    DataError
        Naming the months with data, the months without, the years, and the season-restricted analysis.
    """
    has_y = np.isfinite(y)
    has_x = np.isfinite(exposure) & has_y
    if not has_x.any():
        return
    months = dates.to_numpy().astype("datetime64[M]").astype(np.int64)  # months since 1970-01
    month = months % 12 + 1
    y_days = np.bincount(month[has_y], minlength=13)[1:]
    x_days = np.bincount(month[has_x], minlength=13)[1:]
    recorded = y_days > 0
    empty = recorded & (x_days < EMPTY_MONTH_COVERAGE * np.maximum(y_days, 1))
    if empty.sum() < MIN_EMPTY_MONTHS or empty.sum() == recorded.sum():
        return  # (checked before the years: the cheaper test settles most series)
    years = np.unique(months[has_x] // 12 + 1970)
    if len(years) < 2:
        return
    with_data = [m + 1 for m in range(12) if recorded[m] and not empty[m]]
    without = [m + 1 for m in range(12) if empty[m]]
    season = _month_names(with_data)
    first, last = with_data[0], with_data[-1]
    keep = (
        f"data[data[{date!r}].dt.month.between({first}, {last})]"
        if with_data == list(range(first, last + 1))
        else f"data[data[{date!r}].dt.month.isin({with_data})]"
    )
    df = 7 * len(with_data) / 12
    raise DataError(
        f"exposure column {column!r} is measured only in {season} of each year ({years.min()}–{years.max()}); "
        f"it has no values in {_month_names(without)} although {outcome!r} is recorded then. A year-round "
        "model cannot separate the exposure from the season. Analyse the season with data instead: keep "
        f"those months (e.g. {keep}) and use fewer time-trend df, e.g. trend_df_per_year={df:.1f} (7 × "
        f"{len(with_data)}/12, the usual density over the months kept)."
    )


def check_series(
    y: np.ndarray, exposure: np.ndarray, dates: pd.DatetimeIndex, outcome: str, column: str, date: str = "date"
) -> None:
    """The whole-series checks: outcome with events and variation, a varying exposure, not one season."""
    has_y = np.isfinite(y)
    if _single_value(y[has_y]):  # the dates of the message only when there is one to give
        check_outcome_varies(y[has_y], outcome, dates[has_y], "days with a count")
    has_x = np.isfinite(exposure)
    if _single_value(exposure[has_x]):
        check_exposure_varies(exposure[has_x], column, dates[has_x], "days")
    check_one_season(exposure, y, dates, column, outcome, date)


def _single_value(values: np.ndarray) -> bool:
    """Whether the finite ``values`` (at least one) are all equal: the only case in which
    :func:`check_outcome_varies` or :func:`check_exposure_varies` can raise."""
    v = values[np.isfinite(values)]
    return bool(v.size) and v.min() == v.max()


def check_usable_days(
    y: np.ndarray,
    exposure: np.ndarray,
    used: np.ndarray,
    n_parameters: int,
    dates: pd.DatetimeIndex,
    outcome: str,
    column: str,
    too_few: Callable[[], str],
    window_remedy: str = "",
) -> None:
    """The checks that need the days a model uses and its number of parameters.

    Parameters
    ----------
    y, exposure : ndarray
        Outcome and daily exposure on the full calendar.
    used : ndarray of bool
        The days the model can use.
    n_parameters : int
        Columns of the design (confounders and exposure).
    dates : DatetimeIndex
        The full calendar.
    outcome, column : str
        Names of the outcome and exposure columns.
    too_few : callable
        Returns the message for "no more usable days than parameters" (the design builder names the
        reasons; built only when needed).
    window_remedy : str
        When days were lost to missing exposure in the lag window: the remedy for this kind of lag (the
        design builder's sentence, e.g. a moving average's ``min_count``), added to the days-per-parameter
        message.

    Raises
    ------
    DataError
        No events, constant counts or a constant exposure on the days used; no more days than
        parameters; fewer events than parameters; fewer than :data:`MIN_DAYS_PER_PARAMETER` days per
        parameter. Each names the numbers and what to do.
    """
    n_used = int(used.sum())
    if n_used:
        scope = "usable days"
        if _single_value(y[used]):
            check_outcome_varies(y[used], outcome, dates[used], scope)
        if _single_value(exposure[used]):
            check_exposure_varies(exposure[used], column, dates[used], scope)
    if n_used <= n_parameters:
        raise DataError(too_few())
    events = float(np.sum(y[used]))
    remedy = "use a longer series, fewer df (trend_df_per_year, temperature_df, temperature_lag_df) or fewer terms"
    if events < n_parameters:
        raise DataError(
            f"outcome column {outcome!r} has only {events:g} events on the {n_used} usable days "
            f"({_fmt_dates(dates[used][:1])[0]} to {_fmt_dates(dates[used][-1:])[0]}), fewer than the "
            f"{n_parameters} model parameters; the estimates would rest on almost no cases. Pool outcomes or "
            f"years, or {remedy}."
        )
    if n_used < MIN_DAYS_PER_PARAMETER * n_parameters:
        raise DataError(
            f"the model has {n_parameters} parameters for {n_used} usable days ({n_used / n_parameters:.1f} "
            f"days per parameter, {_span(dates[used])}); at least {MIN_DAYS_PER_PARAMETER} days per parameter "
            f"({MIN_DAYS_PER_PARAMETER * n_parameters} days) are needed for a model that is not over-fitted: "
            f"{remedy}."
            + (f" Days were lost to missing exposure in the lag window. {window_remedy}" if window_remedy else "")
        )
