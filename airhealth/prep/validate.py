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
    wanted = [c for c in columns if c is not None]
    missing = [c for c in wanted if c not in frame.columns]
    if missing:
        available = ", ".join(str(c) for c in frame.columns[:30]) + (" ..." if len(frame.columns) > 30 else "")
        hint = "Check the spelling or rename the column."
        if missing[0] in [n for n in frame.index.names if n is not None]:
            hint = f"The index is named {missing[0]!r}: use {what}.reset_index() to make it a column."
        raise DataError(f"column {missing[0]!r} does not exist in {what}; available columns: {available}. {hint}")
    for column in dict.fromkeys(wanted):
        times = int((frame.columns == column).sum())
        if times > 1:
            raise DataError(f"column {column!r} appears {times} times in {what}; rename or drop one of them.")


def parse_dates(frame: pd.DataFrame, date: str, what: str = "data") -> pd.DatetimeIndex:
    """Parse the ``date`` column of ``frame`` into a timezone-naive ``DatetimeIndex``.

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
        If the column is missing or duplicated, holds missing values, holds values that are not dates, or
        holds timezone-aware dates off local midnight; the message names the first bad rows and their values.
    """
    require_columns(frame, [date], what)
    raw = frame[date]
    if raw.isna().any():
        rows = list(np.flatnonzero(raw.isna().to_numpy()))
        raise DataError(
            f"column {date!r} in {what} has missing dates at row(s) {_listing(rows)}; every row needs a date."
        )
    if pd.api.types.is_datetime64_any_dtype(raw):
        aware = isinstance(raw.dtype, pd.DatetimeTZDtype)
        parsed = raw.dt.tz_localize(None) if aware else pd.to_datetime(raw)
    else:
        text, aware = _wall_clock_text(raw)
        parsed = _parse_one_format(text)
        bad = parsed.isna().to_numpy()
        if bad.any():
            rows = np.flatnonzero(bad)
            examples = [f"row {r}: {raw.iloc[r]!r}" for r in rows[:_SHOW]]
            more = f" (and {len(rows) - _SHOW} more)" if len(rows) > _SHOW else ""
            raise DataError(
                f"column {date!r} in {what} has values that are not dates: {', '.join(examples)}{more}. "
                "Use ISO dates such as 2015-03-31, in one format for the whole column."
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
            "Keep one row per day (aggregate or remove the duplicates)."
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
