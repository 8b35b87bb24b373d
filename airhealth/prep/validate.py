"""Checks on user tables: columns present, dates parseable and daily, counts valid.

Every check raises :class:`~airhealth.errors.DataError` with a message that names the column and the first
offending dates or rows, and says what to do.
"""

from __future__ import annotations

import re
import warnings
from collections.abc import Iterable, Sequence
from datetime import datetime

import numpy as np
import pandas as pd

from ..errors import DataError

__all__ = [
    "check_counts",
    "check_daily_dates",
    "check_finite",
    "check_not_all_missing",
    "parse_dates",
    "require_columns",
]

_SHOW = 5


def _listing(values: Sequence[object], total: int | None = None) -> str:
    shown = ", ".join(str(v) for v in list(values)[:_SHOW])
    total = len(values) if total is None else total
    return shown + (f" (and {total - _SHOW} more)" if total > _SHOW else "")


def _fmt_dates(dates: Iterable[pd.Timestamp]) -> list[str]:
    return [pd.Timestamp(d).strftime("%Y-%m-%d") for d in dates]


def require_columns(frame: pd.DataFrame, columns: Iterable[str | None], what: str = "data") -> None:
    """Raise if a named column is absent from ``frame`` or appears more than once; ``None`` entries are ignored.

    A missing column that is the name of the index gets a hint to call ``reset_index()``.
    """
    if not isinstance(frame, pd.DataFrame):
        raise DataError(f"{what} must be a pandas DataFrame, got {type(frame).__name__}.")
    if isinstance(frame.columns, pd.MultiIndex):
        raise DataError(
            f"{what} has columns on {frame.columns.nlevels} levels (a MultiIndex); give one level of plain "
            f"column names, e.g. {what}.columns = ['_'.join(map(str, c)) for c in {what}.columns]."
        )
    wanted = [c for c in columns if c is not None]
    missing = [c for c in wanted if c not in frame.columns]
    if missing:
        available = ", ".join(str(c) for c in frame.columns[:30]) + (" ..." if len(frame.columns) > 30 else "")
        raise DataError(
            f"column {missing[0]!r} does not exist in {what}; available columns: {available}. "
            + _missing_column_hint(frame, missing[0], what)
        )
    if frame.columns.is_unique:  # (cached by pandas) no column can appear twice
        return
    for column in dict.fromkeys(wanted):
        times = int((frame.columns == column).sum())
        if times > 1:
            raise DataError(f"column {column!r} appears {times} times in {what}; rename or drop one of them.")


def _missing_column_hint(frame: pd.DataFrame, column: str, what: str) -> str:
    """What to do about a missing column: stray spaces in the header, another case, the index, or spelling."""
    names = [c for c in frame.columns if isinstance(c, str)]
    separator = _one_column_separator(frame)
    if separator:
        return separator
    spaced = [c for c in names if c.strip() == column.strip() and c != column]
    if spaced:
        return (
            f"The header has stray spaces: the column is written {spaced[0]!r}. Remove the spaces from the "
            f"header, or name the column exactly as written ({spaced[0]!r})."
        )
    cased = [c for c in names if c.strip().lower() == column.strip().lower()]
    if cased:
        return f"Names are case-sensitive: did you mean {cased[0]!r}?"
    if column in [n for n in frame.index.names if n is not None]:
        return f"The index is named {column!r}: use {what}.reset_index() to make it a column."
    return "Check the spelling or rename the column."


#: Separators other than pandas' default comma: how to pass each in Python and on the command line.
_OTHER_SEPARATORS = {";": ("';'", "--sep ';'"), "\t": ("'\\t'", "--sep tab"), "|": ("'|'", "--sep '|'")}


def _one_column_separator(frame: pd.DataFrame) -> str:
    """A frame read as one column whose name holds ``;``, a tab or ``|``: the separator to read it with.

    Decimal commas show as commas in the cells or, when pandas split the rows at them, as rows with more
    fields than the header (pandas then moves the extra leading fields into the index).
    """
    if frame.shape[1] != 1 or not isinstance(frame.columns[0], str):
        return ""
    name = frame.columns[0]
    for mark, (python, command_line) in _OTHER_SEPARATORS.items():
        if mark in name:
            cells = frame.iloc[:20, 0].astype(str)
            split = not isinstance(frame.index, pd.RangeIndex)
            comma = split or bool(cells.str.contains(r"\d,\d", regex=True).any())
            decimal = ", decimal=','" if comma else ""
            also = " --decimal ," if comma else ""
            return (
                f"The table was read as one column named {name[:60]!r}: the file separates its fields with "
                f"{python}. Read it with pd.read_csv(path, sep={python}{decimal}) (command line: {command_line}{also})."
            )
    return ""


def parse_dates(frame: pd.DataFrame, date: str, what: str = "data", date_format: str | None = None) -> pd.DatetimeIndex:
    """Parse the ``date`` column of ``frame`` into a timezone-naive ``DatetimeIndex``.

    Without ``date_format``, text dates must be ISO 8601 (``2015-03-31``) or another form whose order of
    day and month is not in doubt (``2015/03/31``, ``31 Mar 2015``). Dates written with the day or month
    first (``02/01/2010``, ``13.01.2010``) are refused with the format that fits them, never read
    month-first by default: give ``date_format`` (``"%d/%m/%Y"``; ``--date-format`` on the command line).
    Numbers are refused too, naming what they look like: Excel serial day numbers (``43831``; read them
    with ``date_format="excel"``) or ``yyyymmdd`` (``20200101``; ``date_format="%Y%m%d"``).

    ``date_format="excel"`` reads serial day numbers of Excel's 1900 date system: day 0 is 1899-12-30,
    so the serial numbers from 61 (1900-03-01) on are the days since then (ECMA-376 Office Open XML,
    "Date Representation": 38749 is 2006-02-01 in the 1900 date base system). Any other ``date_format``
    is a ``strftime`` format that every value must follow.

    Dates that carry a time zone or a UTC offset are read as the *local calendar date they state*: for
    daily data a value such as ``2010-04-11 00:00:00+02:00`` means the day 11 April 2010 where the data were
    recorded, so the offset is dropped and the wall-clock date as written is kept (offsets that change at
    daylight saving are therefore fine). A timezone-aware datetime column is likewise read on its own
    clock (``Series.dt.tz_localize(None)``). Such a date must fall at local midnight: timezone-aware dates
    all at one or two other times of day (typically local midnights converted to UTC, e.g.
    ``2010-03-25 23:00:00+00:00`` and, after the DST change, ``22:00``) are a
    :class:`~airhealth.errors.DataError` naming the rows, because the local day cannot be recovered without
    knowing the zone. (Other times of day are left to :func:`check_daily_dates`, which rejects sub-daily
    data.)

    Raises
    ------
    DataError
        If the column is missing or duplicated, holds missing values, holds values that are not dates (or
        do not follow ``date_format``), holds day-first or month-first dates without ``date_format``, holds
        numbers, or holds timezone-aware dates off local midnight; the message names the first bad rows and
        their values, and the format to pass when one fits.
    """
    require_columns(frame, [date], what)
    raw = frame[date]
    if raw.isna().any():
        rows = list(np.flatnonzero(raw.isna().to_numpy()))
        raise DataError(
            f"column {date!r} in {what} has missing dates at row(s) {_listing(rows)}; every row needs a date."
        )
    aware = False
    if date_format is not None:
        parsed = _parse_with_format(raw, date_format, date, what)
    elif pd.api.types.is_datetime64_any_dtype(raw):
        aware = isinstance(raw.dtype, pd.DatetimeTZDtype)
        parsed = raw.dt.tz_localize(None) if aware else pd.to_datetime(raw)
    elif pd.api.types.is_numeric_dtype(raw):
        raise DataError(_numeric_dates_message(raw, date, what))
    else:
        text, aware = _wall_clock_text(raw)
        _refuse_day_month_order(text, date, what)
        parsed = _parse_one_format(text)
        _raise_on_unparsed(
            parsed, raw, date, what, "Use ISO dates such as 2015-03-31, in one format for the whole column."
        )
    index = pd.DatetimeIndex(parsed)
    if aware:
        _check_local_midnight(index, raw, date, what)
    return index


_OFFSET = r"(?:Z|UTC|GMT|[+-]\d{2}(?::?\d{2})?)"
_OFFSET_RE = re.compile(rf"^(?P<stamp>\d{{4}}-\d{{2}}-\d{{2}}(?:[ T][\d:.]+)?)\s*{_OFFSET}$")


def _wall_clock_text(raw: pd.Series) -> tuple[pd.Series, bool]:
    """Drop UTC offsets (and tz of datetime objects) so each value keeps the date and time as written."""
    if raw.dtype == object and raw.map(lambda v: isinstance(v, datetime)).all():
        aware = bool(raw.map(lambda v: v.tzinfo is not None).any())
        return raw.map(lambda v: v.replace(tzinfo=None)), aware
    if not (pd.api.types.is_object_dtype(raw) or pd.api.types.is_string_dtype(raw)):
        return raw, False
    stamp = raw.astype(str).str.strip().str.extract(_OFFSET_RE)["stamp"]
    with_offset = stamp.notna()
    if not with_offset.any():
        return raw, False
    return raw.astype(str).str.strip().where(~with_offset, stamp), True


#: The date format names of the hints: the format, as ``date_format`` / ``--date-format`` takes it.
EXCEL = "excel"
_EXCEL_DAY_ZERO = pd.Timestamp("1899-12-30")  # ECMA-376 "Date Representation", 1900 date base system
_EXCEL_FIRST = 61  # 1900-03-01: below it Excel counts the non-existent 1900-02-29
_EXCEL_RANGE = (_EXCEL_FIRST, 109574)  # up to 2199-12-31, a plausible range for study days
_DAY_MONTH = re.compile(r"^\s*(\d{1,2})([/.-])(\d{1,2})\2(\d{4}|\d{2})\s*$")


def _format_hint(fmt: str) -> str:
    return f"pass date_format={fmt!r} (on the command line: --date-format '{fmt}')"


def _raise_on_unparsed(parsed: pd.Series, raw: pd.Series, date: str, what: str, advice: str) -> None:
    bad = parsed.isna().to_numpy()
    if bad.any():
        rows = np.flatnonzero(bad)
        examples = [f"row {r}: {raw.iloc[r]!r}" for r in rows[:_SHOW]]
        more = f" (and {len(rows) - _SHOW} more)" if len(rows) > _SHOW else ""
        raise DataError(
            f"column {date!r} in {what} has values that are not dates: {', '.join(examples)}{more}. {advice}"
        )


def _parse_with_format(raw: pd.Series, date_format: str, date: str, what: str) -> pd.Series:
    """Dates in the one format the user gave: a ``strftime`` format, or ``"excel"`` serial day numbers."""
    if date_format == EXCEL:
        return _excel_dates(raw, date, what)
    if pd.api.types.is_datetime64_any_dtype(raw):
        raise DataError(f"column {date!r} in {what} already holds dates; do not give a date format for it.")
    text = raw.astype(str).str.strip()
    try:
        parsed = pd.to_datetime(text, format=date_format, errors="coerce")
    except ValueError as exc:
        raise DataError(f"date format {date_format!r} is not understood ({exc}); use e.g. '%d/%m/%Y'.") from exc
    _raise_on_unparsed(parsed, raw, date, what, f"Every value must follow the date format {date_format!r}.")
    return parsed


def _excel_dates(raw: pd.Series, date: str, what: str) -> pd.Series:
    """Excel 1900-system serial day numbers → dates (day 0 = 1899-12-30, valid from serial 61)."""
    numbers = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    lo, hi = _EXCEL_RANGE
    bad = ~np.isfinite(numbers) | (numbers != np.round(numbers)) | (numbers < lo) | (numbers > hi)
    if bad.any():
        rows = np.flatnonzero(bad)
        examples = ", ".join(f"row {r}: {raw.iloc[r]!s}" for r in rows[:_SHOW])
        raise DataError(
            f"column {date!r} in {what} is read as Excel serial day numbers, but some values are not whole "
            f"numbers from {lo} (1900-03-01) to {hi} (2199-12-31): {examples}."
        )
    return pd.Series(_EXCEL_DAY_ZERO + pd.to_timedelta(numbers, unit="D"), index=raw.index)


def _numeric_dates_message(raw: pd.Series, date: str, what: str) -> str:
    """Numbers in a date column: name what they look like (Excel serials, yyyymmdd) and how to read them."""
    v = raw.to_numpy(dtype=float, na_value=np.nan)
    example = f"{float(v[0]):.12g}"
    start = f"column {date!r} in {what} holds numbers (e.g. {example}), not dates"
    whole = bool(np.all(v == np.round(v)))
    lo, hi = _EXCEL_RANGE
    if whole and v.min() >= lo and v.max() <= hi:
        day = (_EXCEL_DAY_ZERO + pd.Timedelta(days=float(v[0]))).strftime("%Y-%m-%d")
        return (
            f"{start}; they look like Excel serial day numbers ({example} would be {day}). Save the dates "
            f"as text in the spreadsheet (ISO, e.g. 2020-01-31), or {_format_hint(EXCEL)}."
        )
    if whole and v.min() >= 18000101 and v.max() <= 22001231:
        return f"{start}; they look like yyyymmdd dates: {_format_hint('%Y%m%d')}."
    return f"{start}. Use ISO dates such as 2015-03-31."


def _refuse_day_month_order(text: pd.Series, date: str, what: str) -> None:
    """Refuse dates such as 02/01/2010 whose day/month order only a format can settle, naming the format."""
    if not (pd.api.types.is_object_dtype(text) or pd.api.types.is_string_dtype(text)):
        return
    parts = text.astype(str).str.extract(_DAY_MONTH)
    if parts[0].isna().any():
        return  # not all in this form: left to the general parser (and its error)
    first, second = parts[0].astype(int), parts[2].astype(int)
    sep, year = parts[1].iloc[0], "%Y" if len(parts[3].iloc[0]) == 4 else "%y"
    day_first, month_first = f"%d{sep}%m{sep}{year}", f"%m{sep}%d{sep}{year}"
    example = text.iloc[int(np.argmax((first > 12).to_numpy()))] if (first > 12).any() else text.iloc[0]
    lead = f"column {date!r} in {what} has dates such as {example!r} whose order of day and month"
    if (first > 12).any() and (second <= 12).all():
        raise DataError(f"{lead} is not ISO; they read day first: {_format_hint(day_first)}.")
    if (second > 12).any() and (first <= 12).all():
        raise DataError(f"{lead} is not ISO; they read month first: {_format_hint(month_first)}.")
    if (first > 12).any() and (second > 12).any():
        raise DataError(
            f"{lead} differs between rows (some have a first number above 12, others a second); use one "
            "format for the whole column, ISO 2015-03-31 if possible."
        )
    raise DataError(
        f"{lead} cannot be told from the data; if day first, {_format_hint(day_first)}; if month first, "
        f"{_format_hint(month_first)}."
    )


def _check_local_midnight(index: pd.DatetimeIndex, raw: pd.Series, date: str, what: str) -> None:
    off = np.flatnonzero(index != index.normalize())
    clock_times = (index[off] - index[off].normalize()).unique()
    if len(off) and len(clock_times) <= 2:  # one or two times of day (DST): midnights moved to another zone
        examples = ", ".join(f"row {r}: {raw.iloc[r]!s}" for r in off[:_SHOW])
        more = f" (and {len(off) - _SHOW} more)" if len(off) > _SHOW else ""
        raise DataError(
            f"column {date!r} in {what} holds timezone-aware dates that are not at local midnight: "
            f"{examples}{more}. These look like local midnights stored in UTC, whose local day cannot be "
            "told without the zone. Convert them to local time first (e.g. "
            f"pd.to_datetime({what}[{date!r}], utc=True).dt.tz_convert('Europe/Oslo')) or write plain dates such as "
            "2010-03-26."
        )


def _parse_one_format(raw: pd.Series) -> pd.Series:
    """Parse dates as ISO 8601, else in the one format pandas infers from the first value.

    Every value must share that format. (Element-wise "mixed" parsing would read 02/01/2010 as
    February 1 but 13/01/2010 as January 13, silently reordering day-first dates.) Unparseable values
    become NaT for the caller to report.
    """
    iso = pd.to_datetime(raw, errors="coerce", format="ISO8601")
    if iso.notna().all():
        return iso
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # "could not infer format": reported as bad rows
        inferred = pd.to_datetime(raw, errors="coerce")
    return inferred if inferred.notna().sum() > iso.notna().sum() else iso


def check_finite(frame: pd.DataFrame, columns: Iterable[str], dates: pd.DatetimeIndex, what: str = "data") -> None:
    """Raise if a numeric column holds infinite values (missing values are allowed and handled later)."""
    for column in columns:
        values = frame[column]
        if not pd.api.types.is_numeric_dtype(values) or pd.api.types.is_bool_dtype(values):
            continue
        v = values.to_numpy(dtype=float, na_value=np.nan)
        infinite = np.isinf(v)
        if infinite.any():
            at = _listing(_fmt_dates(dates[np.flatnonzero(infinite)]), int(infinite.sum()))
            raise DataError(
                f"column {column!r} in {what} has infinite values on {at}; "
                "replace them by a valid number or leave the day missing (NaN)."
            )


def check_daily_dates(dates: pd.DatetimeIndex, date: str = "date", what: str = "data") -> None:
    """Require one row per calendar day: midnight timestamps, no duplicates, daily steps (gaps allowed).

    A gap (a step of several whole days) is legal: the calendar is completed later, with a warning.
    Sub-daily timestamps or a series whose typical step is not one day are errors.
    """
    dup = dates[dates.duplicated()]
    if len(dup):
        raise DataError(
            f"column {date!r} in {what} has duplicated dates: {_listing(_fmt_dates(dup.unique()))}. "
            "Keep one row per day: aggregate or remove the duplicates (airhealth.prep.merge_duplicate_days; on the "
            "command line --duplicates mean or --duplicates first)."
        )
    off_midnight = dates != dates.normalize()
    if off_midnight.any():
        first = dates[off_midnight][:_SHOW]
        raise DataError(
            f"column {date!r} in {what} is not daily: it has times of day, e.g. {', '.join(map(str, first))}. "
            "Aggregate sub-daily data to daily values first (see airhealth.prep.hourly)."
        )
    if len(dates) > 2:
        steps = np.diff(np.sort(dates.to_numpy())).astype("timedelta64[D]").astype(np.int64)
        if np.median(steps) != 1:
            raise DataError(
                f"column {date!r} in {what} is not a daily series: the typical step between dates is "
                f"{int(np.median(steps))} days. airhealth models daily data; supply one row per day."
            )


def check_counts(values: pd.Series, column: str, dates: pd.DatetimeIndex | None = None) -> None:
    """Require non-negative whole numbers (missing values allowed) in a count column."""
    if not (pd.api.types.is_numeric_dtype(values) or values.isna().all()):
        raise DataError(f"outcome column {column!r} is not numeric (dtype {values.dtype}); it must hold daily counts.")
    v = values.to_numpy(dtype=float, na_value=np.nan)
    where = dates if dates is not None else pd.RangeIndex(len(v))

    def _at(mask: np.ndarray) -> str:
        idx = np.flatnonzero(mask)
        labels = _fmt_dates(where[idx]) if dates is not None else [f"row {i}" for i in idx]
        return _listing([f"{lab} ({v[i]:g})" for lab, i in zip(labels, idx, strict=False)], len(idx))

    finite = np.isfinite(v)
    if np.isinf(v).any():
        raise DataError(f"outcome column {column!r} has infinite values at {_at(np.isinf(v))}.")
    negative = finite & (v < 0)
    if negative.any():
        raise DataError(f"outcome column {column!r} has negative counts at {_at(negative)}; counts must be >= 0.")
    fractional = finite & (v != np.round(v))
    if fractional.any():
        raise DataError(
            f"outcome column {column!r} has non-integer counts at {_at(fractional)}; "
            "the model needs whole daily counts (rates belong in an offset)."
        )


def check_not_all_missing(values: pd.Series, column: str, role: str) -> None:
    """Raise if a column needed as ``role`` (exposure, outcome, ...) has no non-missing value."""
    if values.isna().all():
        raise DataError(
            f"{role} column {column!r} is entirely missing; check the column or the merge that produced it."
        )
