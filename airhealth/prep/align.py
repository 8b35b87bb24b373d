"""Align daily tables (counts, pollutants, weather, ...) on one complete daily calendar."""

from __future__ import annotations

import re
from collections.abc import Sequence
from typing import Literal

import numpy as np
import pandas as pd
from pandas.api.types import is_datetime64_any_dtype

from .._choices import check_choice
from .._warn import warn_user
from ..errors import DataError, DataWarning, SpecificationError
from .calendar import complete_calendar
from .validate import EXCEL, check_daily_dates, parse_dates, require_columns

__all__ = [
    "DuplicateDays",
    "align_daily",
    "merge_duplicate_days",
    "prepare_daily",
    "restrict_months",
    "restrict_period",
]

DuplicateDays = Literal["error", "mean", "first"]


def prepare_daily(
    frame: pd.DataFrame, date: str = "date", what: str = "data", date_format: str | None = None
) -> pd.DataFrame:
    """Validate one daily table and return a sorted copy on a complete calendar.

    The ``date`` column is parsed (in ``date_format`` if given, see
    :func:`~airhealth.prep.validate.parse_dates`; errors name the bad rows), duplicated dates and non-daily steps are
    errors, and calendar gaps become rows of missing values with a warning. The caller's frame is never
    modified.
    """
    ready = _consecutive_days(frame, date) if date_format is None else None
    if ready is not None:
        return ready
    dates = parse_dates(frame, date, what, date_format=date_format)
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
    if values.dtype != np.dtype("datetime64[ns]"):  # (assigning a column costs more than the copy)
        out[date] = values.astype("datetime64[ns]")
    index = out.index  # as reset_index(drop=True) leaves it: 0, 1, ..., unnamed
    if not (isinstance(index, pd.RangeIndex) and index.start == 0 and index.step == 1 and index.name is None):
        out.index = pd.RangeIndex(len(out))
    return out


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
        Calendar limits (dates or ISO text such as ``"2015-03-31"``); by default from the earliest to the
        latest date in any table.

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
    lo = min(p.index.min() for p in prepared) if start is None else _as_day(start, "start")
    hi = max(p.index.max() for p in prepared) if end is None else _as_day(end, "end")
    if hi < lo:
        raise DataError(f"the calendar is empty: end {hi:%Y-%m-%d} is before start {lo:%Y-%m-%d}.")
    calendar = pd.date_range(lo, hi, freq="D", name=date)
    joined = pd.concat([p.reindex(calendar) for p in prepared], axis=1)
    return joined.reset_index()


_ISO_DAY = re.compile(r"^\d{4}-\d{2}-\d{2}(?:[ T]\d{2}:\d{2}(?::\d{2})?)?$")


def _as_day(value: str | pd.Timestamp, name: str, date_format: str | None = None) -> pd.Timestamp:
    """A period bound as a day: a date object, ISO text (YYYY-MM-DD), or text in ``date_format``.

    Other text is refused, never guessed: ``02/01/2015`` could be 2 January or 1 February.
    """
    if isinstance(value, str):
        text = value.strip()
        day = None
        if date_format is not None and date_format != EXCEL:
            day = pd.to_datetime(text, format=date_format, errors="coerce")
        if (day is None or pd.isna(day)) and _ISO_DAY.match(text):
            day = pd.to_datetime(text, errors="coerce", format="ISO8601")
        if (day is None or pd.isna(day)) and _ISO_DAY.match(text):
            raise SpecificationError(f"{name} {value!r} is not a date; use an ISO date such as 2015-03-31.")
        if day is None or pd.isna(day):
            given = f" or in the date format {date_format!r}" if date_format and date_format != EXCEL else ""
            raise SpecificationError(
                f"{name} {value!r} is not a date in ISO form (YYYY-MM-DD, e.g. 2015-03-31){given}; write the day as "
                "YYYY-MM-DD, so that its order of day and month is not a guess."
            )
        value = day
    try:
        day = pd.Timestamp(value)
    except (ValueError, TypeError) as exc:
        raise SpecificationError(f"{name} {value!r} is not a date; use an ISO date such as 2015-03-31.") from exc
    if day != day.normalize():
        raise SpecificationError(f"{name} {value!r} has a time of day; give a whole day such as 2015-03-31.")
    return day


def restrict_period(
    frame: pd.DataFrame,
    start: str | pd.Timestamp | None = None,
    end: str | pd.Timestamp | None = None,
    date: str = "date",
    what: str = "data",
    date_format: str | None = None,
) -> pd.DataFrame:
    """The rows of ``frame`` dated from ``start`` to ``end`` (both included), as a new frame.

    Use it to fit a period with complete data, or to leave out a long gap at either end. ``None`` leaves
    that end open. ``start`` and ``end`` are dates or ISO text (``"2015-03-31"``); text in another form is
    accepted only in ``date_format`` (which also reads the ``date`` column), never guessed. The caller's
    frame is not modified; the rows keep their order and values.

    Raises
    ------
    SpecificationError
        If ``start`` or ``end`` is not a whole day, is text neither ISO nor in ``date_format`` (e.g.
        ``"02/01/2015"``, whose order of day and month is in doubt), or ``end`` is before ``start``.
    DataError
        If the dates cannot be read (see :func:`~airhealth.prep.validate.parse_dates`) or no row falls in the
        period (the message gives the period the data cover).

    Examples
    --------
    >>> data = pd.DataFrame({"date": ["2020-01-01", "2020-01-02", "2020-01-03"], "deaths": [3, 5, 4]})
    >>> restrict_period(data, start="2020-01-02")["deaths"].tolist()
    [5, 4]
    """
    lo = None if start is None else _as_day(start, "start", date_format)
    hi = None if end is None else _as_day(end, "end", date_format)
    if lo is not None and hi is not None and hi < lo:
        raise SpecificationError(f"the period is empty: end {hi:%Y-%m-%d} is before start {lo:%Y-%m-%d}.")
    as_given = date_format if date in frame.columns and not is_datetime64_any_dtype(frame[date]) else None
    dates = parse_dates(frame, date, what, date_format=as_given)
    keep = np.ones(len(frame), dtype=bool)
    if lo is not None:
        keep &= dates >= lo
    if hi is not None:
        keep &= dates <= hi
    if not keep.any():
        period = f"{'the start' if lo is None else f'{lo:%Y-%m-%d}'} to {'the end' if hi is None else f'{hi:%Y-%m-%d}'}"
        raise DataError(
            f"no row of {what} falls in the period {period}: its dates run from {dates.min():%Y-%m-%d} to "
            f"{dates.max():%Y-%m-%d}."
        )
    return frame.loc[keep].reset_index(drop=True)


def restrict_months(frame: pd.DataFrame, months: Sequence[int], date: str = "date", what: str = "data") -> pd.DataFrame:
    """The rows of ``frame`` in the calendar ``months`` (1-12) of every year, as a new frame.

    For a season-restricted analysis, e.g. an exposure measured only from April to September: the months
    left out become calendar gaps, which the model handles as missing days. The caller's frame is not
    modified.

    Raises
    ------
    SpecificationError
        If a month is not a whole number from 1 to 12.
    DataError
        If no row falls in those months.
    """
    chosen = sorted(set(months))
    if not chosen or any(
        isinstance(m, bool) or not isinstance(m, int | np.integer) or not 1 <= m <= 12 for m in chosen
    ):
        raise SpecificationError(f"months must be whole numbers from 1 to 12, got {list(months)!r}.")
    dates = parse_dates(frame, date, what)
    keep = np.isin(dates.month, chosen)
    if not keep.any():
        raise DataError(f"no row of {what} falls in the months {chosen}.")
    return frame.loc[keep].reset_index(drop=True)


def merge_duplicate_days(
    frame: pd.DataFrame, how: DuplicateDays = "error", date: str = "date", what: str = "data"
) -> pd.DataFrame:
    """One row per date: several rows of the same date are averaged (``"mean"``) or the first is kept.

    ``"error"`` returns ``frame`` unchanged (duplicated dates are then an error of the date checks). With
    ``"mean"``, numeric columns are averaged (a count averaged over rows that differ is no longer a whole
    number, and is refused later as a count) and other columns keep their first value. Dates are parsed
    (:func:`~airhealth.prep.validate.parse_dates`) and the rows keep the order of each date's first
    appearance. A :class:`~airhealth.errors.DataWarning` says how many dates were merged and how.

    Examples
    --------
    >>> data = pd.DataFrame({"date": ["2020-01-01", "2020-01-01", "2020-01-02"], "pm25": [10.0, 12.0, 9.0]})
    >>> merge_duplicate_days(data, "mean")["pm25"].tolist()  # doctest: +SKIP
    [11.0, 9.0]
    """
    check_choice("duplicates", how, DuplicateDays)
    if how == "error":
        return frame
    dates = parse_dates(frame, date, what)
    repeated = dates[dates.duplicated()].unique()
    if not len(repeated):
        return frame
    keyed = frame.assign(**{date: dates})
    if how == "first":
        merged = keyed.loc[~dates.duplicated()]
    else:
        groups = keyed.groupby(date, sort=False)
        numeric = [c for c in frame.columns if c != date and pd.api.types.is_numeric_dtype(frame[c])]
        merged = groups.first()
        merged[numeric] = groups[numeric].mean()
        merged = merged.reset_index()[list(frame.columns)]
    shown = ", ".join(f"{d:%Y-%m-%d}" for d in repeated[:5]) + (" ..." if len(repeated) > 5 else "")
    action = "averaged their rows" if how == "mean" else "kept the first row of each"
    n = len(repeated)
    lead = f"{n} dates appear" if n > 1 else "1 date appears"
    warn_user(f"{lead} more than once in {what} ({shown}); {action}.", DataWarning)
    return merged.reset_index(drop=True)
