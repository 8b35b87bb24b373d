"""Reading raw hourly monitoring data into one clean, documented form.

:func:`clean_hourly` turns a table of hourly readings (one row per monitor and hour) into a frame with the
columns ``monitor``, ``hour`` and ``value``, where ``hour`` is the *start* of the hour in local standard time
(LST: the zone's clock without daylight saving, all year). Every later step (daily statistics, coverage,
gaps) works on that frame. The rules for awkward input are fixed here and documented in
``docs/hourly-to-daily.md``:

* timestamps that cannot be read, or rows without a timestamp: :class:`~airhealth.errors.DataError` listing the
  rows;
* values that are not numbers (other than empty cells, which are missing hours): ``DataError`` naming the rows
  and the offending text;
* timestamps not on the full hour (sub-hourly data): ``DataError`` (aggregate to hours first);
* the same monitor and hour twice: ``DataError`` listing the duplicates, unless ``duplicates="mean"`` (average
  them) or ``"first"`` (keep the first row);
* negative concentrations: always flagged with a :class:`~airhealth.errors.DataWarning`; kept by default
  (small negatives are instrument noise near zero and dropping only them biases means upwards), set to missing
  with ``negative="drop"``, or refused with ``negative="error"``;
* timestamps out of order within a monitor: sorted, with a ``DataWarning`` saying so;
* a missing or blank monitor ID (with ``monitor`` given): ``DataError`` listing the rows;
* with ``times_in="wall"``, clock times skipped when clocks go forward, or a repeated fall-back hour whose two
  readings cannot be told apart: ``DataError`` listing the rows.

Row numbers in messages are the input frame's index labels (the CLI labels rows by their CSV line number).
"""

from __future__ import annotations

import re
from typing import Literal
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import numpy as np
import pandas as pd

from .._choices import check_choice
from .._warn import warn_user
from ..errors import DataError, DataWarning, SpecificationError

__all__ = ["DuplicateRule", "HourLabel", "NegativeRule", "TimesIn", "clean_hourly", "standard_offsets"]

HourLabel = Literal["start", "end"]
TimesIn = Literal["standard", "wall", "utc"]
NegativeRule = Literal["keep", "drop", "error"]
DuplicateRule = Literal["error", "mean", "first"]

_HOUR = pd.Timedelta(hours=1)
_OFFSET_RE = re.compile(r"\d{2}:\d{2}(?::\d{2}(?:\.\d*)?)?\s*(?:Z|[+-]\d{2}(?::?\d{2})?)$")
_MIDNIGHT_24_RE = re.compile(r"^\d{4}-\d{2}-\d{2}[ T]24(?::00){1,2}$")
_SHOW = 10  # rows listed in an error message


def _rows(index: pd.Index, limit: int = _SHOW) -> str:
    shown = ", ".join(str(i) for i in index[:limit])
    more = f" and {len(index) - limit} more" if len(index) > limit else ""
    return f"{shown}{more}"


def _zone(timezone: str) -> ZoneInfo:
    try:
        return ZoneInfo(timezone)
    except (ZoneInfoNotFoundError, ValueError):
        raise SpecificationError(
            f"timezone={timezone!r} is not a known IANA time zone; use a name such as 'Europe/Oslo', "
            "'America/New_York' or 'UTC'."
        ) from None


def standard_offsets(timezone: str, years: np.ndarray | list[int]) -> dict[int, pd.Timedelta]:
    """UTC offset of local standard time in ``timezone`` for each year.

    Local standard time is taken as the smaller of the zone's UTC offsets on 1 January and 1 July of the year
    (the offset without daylight saving, in either hemisphere).
    """
    zone = _zone(timezone)
    out = {}
    for year in {int(y) for y in years}:
        stamps = pd.DatetimeIndex([f"{year}-01-01 12:00", f"{year}-07-01 12:00"]).tz_localize("UTC")
        offsets = [ts.tz_convert(zone).utcoffset() for ts in stamps]
        out[year] = pd.Timedelta(min(offsets))
    return out


def _read_times(raw: pd.Series, column: str, time_format: str | None) -> pd.Series:
    """Parse the time column; naive or UTC-aware datetimes; errors name the rows."""
    if raw.isna().any():
        raise DataError(f"time column {column!r} is empty in rows {_rows(raw.index[raw.isna()])}.")
    if isinstance(raw.dtype, pd.DatetimeTZDtype):
        return raw.dt.tz_convert("UTC")
    if pd.api.types.is_datetime64_dtype(raw.dtype):
        return raw
    text = raw.astype(str).str.strip()
    late = text.str.match(_MIDNIGHT_24_RE)  # "2022-01-01 24:00" = midnight ending that day
    if late.any():
        text = text.where(~late, text.str.slice(0, 10) + " 00:00")
    has_offset = text.str.contains(_OFFSET_RE)
    if has_offset.any() and not has_offset.all():
        raise DataError(
            f"time column {column!r} mixes timestamps with and without a UTC offset (no offset in rows "
            f"{_rows(text.index[~has_offset])}); write all of them one way."
        )
    parsed = pd.to_datetime(text, errors="coerce", format=time_format, utc=bool(has_offset.all()))
    bad = parsed.isna()
    if bad.any():
        examples = ", ".join(repr(v) for v in text[bad].iloc[:3])
        raise DataError(
            f"time column {column!r} could not be read as dates and times in rows {_rows(text.index[bad])} "
            f"(e.g. {examples}); use ISO 8601 such as '2022-03-27 01:00' or pass time_format."
        )
    if late.any():
        parsed = parsed.where(~late, parsed + pd.Timedelta(days=1))
    return parsed


def _read_values(raw: pd.Series, column: str) -> pd.Series:
    """Numbers from the value column; empty cells are missing; any other text is an error naming the rows."""
    if pd.api.types.is_numeric_dtype(raw.dtype) and not pd.api.types.is_bool_dtype(raw.dtype):
        values = raw.astype(float)
    else:
        text = raw.astype("string").str.strip()
        values = pd.to_numeric(text.where(text != ""), errors="coerce").astype(float)
        bad = values.isna() & text.notna() & (text != "")
        if bad.any():
            examples = ", ".join(repr(v) for v in text[bad].iloc[:3])
            raise DataError(
                f"value column {column!r} holds text that is not a number in rows {_rows(text.index[bad])} "
                f"(e.g. {examples}); leave missing hours empty or declare the code as missing "
                "(CLI: --na-values)."
            )
    infinite = np.isinf(values)
    if infinite.any():
        raise DataError(f"value column {column!r} is infinite in rows {_rows(values.index[infinite])}.")
    return values


def _to_standard_time(times: pd.Series, monitors: pd.Series, timezone: str | None, times_in: TimesIn) -> pd.Series:
    """Naive local-standard-time timestamps from parsed times."""
    aware = isinstance(times.dtype, pd.DatetimeTZDtype)
    if timezone is None:
        if aware:
            raise DataError(
                "the timestamps carry UTC offsets; pass timezone (the monitors' IANA zone, e.g. "
                "'Europe/Oslo', or 'UTC') so that days can be formed in local standard time."
            )
        return times  # taken as local standard time already
    _zone(timezone)
    if not aware and times_in == "standard":
        return times
    if not aware and times_in == "utc":
        utc = times
    elif not aware:  # local clock time with daylight saving
        utc = _localize_wall(times, monitors, timezone)
    else:
        utc = times.dt.tz_localize(None)
    offsets = standard_offsets(timezone, utc.dt.year.unique())
    return utc + utc.dt.year.map(offsets)


def _localize_wall(times: pd.Series, monitors: pd.Series, timezone: str) -> pd.Series:
    """Local clock times (with DST) to naive UTC, per monitor; repeated fall-back hours inferred by order."""
    out = pd.Series(pd.NaT, index=times.index, dtype="datetime64[us]")
    for _, idx in monitors.groupby(monitors, sort=False).groups.items():
        part = times.loc[idx].sort_values(kind="stable")
        clock = pd.DatetimeIndex(part)
        _check_clock_times_exist(clock, part.index, timezone)
        try:
            local = clock.tz_localize(timezone, ambiguous="infer", nonexistent="raise")
        except Exception:  # pandas raises several types when the repeated hour cannot be inferred
            unsure = clock.tz_localize(timezone, ambiguous="NaT", nonexistent="NaT").isna()
            raise DataError(
                f"local clock times in {timezone} occur twice (the hour repeated when clocks go back) and "
                f"could not be told apart in rows {_rows(part.index[unsure])} (e.g. "
                f"{clock[unsure][0]:%Y-%m-%d %H:%M}). With times_in='wall' (CLI --times-in wall) each monitor "
                "needs both readings of the repeated hour, in time order; otherwise write the timestamps with "
                "UTC offsets, or use times_in='standard' if they are in local standard time all year."
            ) from None
        out.loc[part.index] = local.tz_convert("UTC").tz_localize(None).as_unit("us")
    return out


def _check_clock_times_exist(clock: pd.DatetimeIndex, rows: pd.Index, timezone: str) -> None:
    """Raise, naming the rows, if local clock times fall in the hour skipped when clocks go forward."""
    missing = clock.tz_localize(timezone, ambiguous=True, nonexistent="NaT").isna()
    if missing.any():
        raise DataError(
            f"local clock times in {timezone} that do not exist (skipped when clocks go forward) in rows "
            f"{_rows(rows[missing])} (e.g. {clock[missing][0]:%Y-%m-%d %H:%M}). If the timestamps are in "
            "local standard time all year, use times_in='standard' (CLI --times-in standard); if they are UTC, "
            "times_in='utc'; otherwise correct or remove these rows."
        )


def _resolve_duplicates(frame: pd.DataFrame, rule: DuplicateRule, one_monitor: bool = False) -> pd.DataFrame:
    dup = frame.duplicated(["monitor", "hour"], keep=False)
    if not dup.any():
        return frame
    if rule == "error":
        shown = frame[dup].head(_SHOW)
        listing = "; ".join(
            f"row {i}: monitor {m!r} hour {h:%Y-%m-%d %H:%M}"
            for i, m, h in zip(shown.index, shown["monitor"], shown["hour"], strict=True)
        )
        more = f" ({int(dup.sum())} rows in all)" if dup.sum() > _SHOW else ""
        several = (
            " Several monitors in one table? Name their column with monitor=COL (CLI: --monitor COL)."
            if one_monitor
            else ""
        )
        raise DataError(
            f"duplicated timestamps for the same monitor: {listing}{more}.{several} Otherwise remove them, or "
            "pass duplicates='mean' (average) or duplicates='first' (keep the first row)."
        )
    if rule == "first":
        return frame[~frame.duplicated(["monitor", "hour"], keep="first")]
    return frame.groupby(["monitor", "hour"], as_index=False, sort=False)["value"].mean()


def _handle_negatives(frame: pd.DataFrame, rule: NegativeRule, column: str) -> pd.DataFrame:
    negative = frame["value"] < 0
    if not negative.any():
        return frame
    where = f"{int(negative.sum())} negative values in {column!r} (rows {_rows(frame.index[negative])})"
    if rule == "error":
        raise DataError(f"{where}; correct them or pass negative='keep' or negative='drop'.")
    action = "kept as measured" if rule == "keep" else "set to missing"
    warn_user(f"{where}: {action} (negative={rule!r}).", DataWarning)
    if rule == "drop":
        frame = frame.assign(value=frame["value"].mask(negative))
    return frame


def clean_hourly(
    hourly: pd.DataFrame,
    *,
    time: str,
    value: str,
    monitor: str | None = None,
    hour_label: HourLabel = "start",
    timezone: str | None = None,
    times_in: TimesIn = "standard",
    time_format: str | None = None,
    negative: NegativeRule = "keep",
    duplicates: DuplicateRule = "error",
) -> pd.DataFrame:
    """Validate raw hourly readings; return ``monitor``, ``hour`` (start, local standard time), ``value``.

    Parameters
    ----------
    hourly : DataFrame
        One row per monitor and hour. Not modified.
    time, value : str
        Column names of the timestamp and the concentration.
    monitor : str, optional
        Column naming the monitor (every row needs an ID); without it all rows are one monitor called
        ``"all"``.
    hour_label : {"start", "end"}, default "start"
        Whether a timestamp marks the start of its hour (00:00 = 00:00–01:00) or its end (01:00 =
        00:00–01:00; ``24:00`` is accepted as the end of a day).
    timezone : str, optional
        IANA zone of the monitors. Without it, naive timestamps are used as they are (taken to be local
        standard time); with it, see ``times_in``. Timestamps with UTC offsets need a zone.
    times_in : {"standard", "wall", "utc"}, default "standard"
        How naive timestamps are read when ``timezone`` is given: local standard time all year (the usual
        reporting of monitoring networks), local clock time with daylight saving (the repeated fall-back hour
        must appear twice, in order), or UTC.
    time_format : str, optional
        ``strftime`` format of the timestamps when they are not ISO 8601.
    negative : {"keep", "drop", "error"}, default "keep"
        What to do with negative concentrations (always flagged with a ``DataWarning``).
    duplicates : {"error", "mean", "first"}, default "error"
        What to do when a monitor has two rows for the same hour.

    Returns
    -------
    DataFrame
        Columns ``monitor`` (str), ``hour`` (naive datetime, start of hour in LST), ``value`` (float, NaN for
        missing), sorted by monitor and hour; index labels are those of the input rows.
    """
    check_choice("hour_label", hour_label, HourLabel)
    check_choice("times_in", times_in, TimesIn)
    check_choice("negative", negative, NegativeRule)
    check_choice("duplicates", duplicates, DuplicateRule)
    _check_columns(hourly, (time, value, monitor))
    monitors = _monitor_ids(hourly, monitor)
    hours = _hour_starts(hourly[time], time, monitors, timezone, times_in, time_format, hour_label)
    frame = pd.DataFrame({"monitor": monitors, "hour": hours, "value": _read_values(hourly[value], value)})
    frame = _handle_negatives(frame, negative, value)
    frame = _resolve_duplicates(frame, duplicates, one_monitor=monitor is None)
    return _sorted(frame)


def _check_columns(hourly: pd.DataFrame, names: tuple[str | None, ...]) -> None:
    for name in names:
        if name is not None and name not in hourly.columns:
            raise DataError(f"column {name!r} is not in the hourly data; columns are {list(hourly.columns)}.")
    if len(hourly) == 0:
        raise DataError("the hourly data have no rows.")


def _monitor_ids(hourly: pd.DataFrame, monitor: str | None) -> pd.Series:
    """Monitor IDs as text; one monitor ``"all"`` without a column; missing or blank IDs are an error."""
    if not monitor:
        return pd.Series("all", index=hourly.index, dtype=object)
    raw = hourly[monitor]
    blank = raw.isna() | (raw.astype(str).str.strip() == "")
    if blank.any():
        raise DataError(
            f"monitor column {monitor!r} is empty in rows {_rows(raw.index[blank])}; give every reading its "
            "monitor's ID (or drop those rows)."
        )
    return raw.astype(str)


def _hour_starts(
    raw: pd.Series,
    column: str,
    monitors: pd.Series,
    timezone: str | None,
    times_in: TimesIn,
    time_format: str | None,
    hour_label: HourLabel,
) -> pd.Series:
    """Start of each reading's hour in local standard time; timestamps off the full hour are an error."""
    times = _to_standard_time(_read_times(raw, column, time_format), monitors, timezone, times_in)
    if hour_label == "end":
        times = times - _HOUR
    off_hour = times != times.dt.floor("h")
    if off_hour.any():
        raise DataError(
            f"time column {column!r} has timestamps not on the full hour in rows {_rows(times.index[off_hour])}; "
            "aggregate sub-hourly readings to hourly means first."
        )
    return times.astype("datetime64[us]")


def _sorted(frame: pd.DataFrame) -> pd.DataFrame:
    """Sort by monitor and hour, warning if the readings were out of time order within a monitor."""
    backwards = frame.groupby("monitor", sort=False)["hour"].diff() < pd.Timedelta(0)
    if backwards.any():
        warn_user(
            f"timestamps are not in time order within a monitor (first at row {frame.index[backwards][0]}); "
            "they were sorted.",
            DataWarning,
        )
    return frame.sort_values(["monitor", "hour"], kind="stable")
