"""Align daily tables (counts, pollutants, weather, ...) on one complete daily calendar."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import DataError
from .calendar import complete_calendar
from .validate import check_daily_dates, parse_dates, require_columns

__all__ = ["align_daily", "prepare_daily"]


def prepare_daily(frame: pd.DataFrame, date: str = "date", what: str = "data") -> pd.DataFrame:
    """Validate one daily table and return a sorted copy on a complete calendar.

    The ``date`` column is parsed (errors name the bad rows), duplicated dates and non-daily steps are
    errors, and calendar gaps become rows of missing values with a warning. The caller's frame is never
    modified.
    """
    ready = _consecutive_days(frame, date)
    if ready is not None:
        return ready
    dates = parse_dates(frame, date, what)
    check_daily_dates(dates, date, what)
    return complete_calendar(frame, dates, date)


def _consecutive_days(frame: pd.DataFrame, date: str) -> pd.DataFrame | None:
    """Fast path: a copy of ``frame`` when its dates are already naive midnight days, one after another.

    Returns ``None`` (use the full checks) for anything else: text dates, time zones, missing dates,
    times of day, duplicates, gaps or unsorted rows.
    """
    if date not in frame.columns or list(frame.columns).count(date) != 1:
        return None
    column = frame[date]
    if not pd.api.types.is_datetime64_dtype(column) or len(column) < 2:
        return None
    values = column.to_numpy()
    days = values.astype("datetime64[D]")
    if np.isnat(values).any() or (days != values).any() or (np.diff(days) != np.timedelta64(1, "D")).any():
        return None
    out = frame.copy()
    out[date] = values.astype("datetime64[ns]")
    return out.reset_index(drop=True)


def align_daily(
    *tables: pd.DataFrame,
    date: str = "date",
    names: tuple[str, ...] | None = None,
    start: str | pd.Timestamp | None = None,
    end: str | pd.Timestamp | None = None,
) -> pd.DataFrame:
    """Join daily tables on a complete calendar, one row per day.

    Parameters
    ----------
    *tables : DataFrame
        Daily tables, each with a ``date`` column, e.g. counts, pollutant levels and weather.
    date : str
        Name of the date column in every table.
    names : tuple of str, optional
        Names of the tables used in error messages (default "table 1", "table 2", ...).
    start, end : date-like, optional
        Calendar limits; by default from the earliest to the latest date in any table.

    Returns
    -------
    DataFrame
        One row per calendar day; days absent from a table carry missing values in that table's columns.
        Nothing is silently dropped or shifted.

    Raises
    ------
    DataError
        On unparseable or duplicated dates, non-daily steps, or a column present twice (in one table or in
        two).

    Examples
    --------
    >>> import pandas as pd
    >>> counts = pd.DataFrame({"date": ["2020-01-01", "2020-01-02", "2020-01-03"], "deaths": [3, 5, 4]})
    >>> pm = pd.DataFrame({"date": ["2020-01-01", "2020-01-03"], "pm25": [12.0, 30.5]})
    >>> align_daily(counts, pm)["pm25"].tolist()
    [12.0, nan, 30.5]
    """
    if not tables:
        raise DataError("align_daily needs at least one table.")
    labels = names or tuple(f"table {i + 1}" for i in range(len(tables)))
    if len(labels) != len(tables):
        raise DataError(f"got {len(tables)} tables but {len(labels)} names.")
    prepared, seen = [], {}
    for table, label in zip(tables, labels, strict=True):
        require_columns(table, [date], label)
        repeated = table.columns[table.columns.duplicated()].unique()
        if len(repeated):
            times = int((table.columns == repeated[0]).sum())
            raise DataError(f"column {repeated[0]!r} appears {times} times in {label}; rename or drop one of them.")
        for column in table.columns:
            if column != date and column in seen:
                raise DataError(f"column {column!r} appears in both {seen[column]} and {label}; rename one of them.")
            seen.setdefault(column, label)
        dates = parse_dates(table, date, label)
        check_daily_dates(dates, date, label)
        prepared.append(table.assign(**{date: dates}).set_index(date))
    lo = min(p.index.min() for p in prepared) if start is None else pd.Timestamp(start)
    hi = max(p.index.max() for p in prepared) if end is None else pd.Timestamp(end)
    if hi < lo:
        raise DataError(f"the calendar is empty: end {hi:%Y-%m-%d} is before start {lo:%Y-%m-%d}.")
    calendar = pd.date_range(lo, hi, freq="D", name=date)
    joined = pd.concat([p.reindex(calendar) for p in prepared], axis=1)
    return joined.reset_index()
