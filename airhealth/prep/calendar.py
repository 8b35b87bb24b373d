"""Calendar variables: day of week, public holidays, warm/cold season, and completion of a daily calendar."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._warn import warn_user
from ..errors import DataError, DataWarning, SpecificationError

__all__ = ["complete_calendar", "day_of_week", "holiday_indicator", "season_column"]

WEEKDAY_NAMES = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")


def complete_calendar(frame: pd.DataFrame, dates: pd.DatetimeIndex, date: str = "date") -> pd.DataFrame:
    """Return a copy of ``frame`` re-indexed to every day from the first to the last date.

    Days absent from ``frame`` become rows whose other columns are missing; nothing is dropped or shifted.
    A :class:`~airhealth.errors.DataWarning` lists the gaps that were filled; it is attributed to the first
    line outside airhealth (the user's script or notebook cell), however deep the call.
    """
    out = frame.copy()
    out[date] = dates
    out = out.sort_values(date, kind="stable").set_index(date)
    full = pd.date_range(out.index.min(), out.index.max(), freq="D", name=date)
    if len(full) != len(out):
        absent = full.difference(out.index)
        runs = _runs(absent)
        listing = ", ".join(f"{a:%Y-%m-%d}" + ("" if a == b else f" to {b:%Y-%m-%d}") for a, b in runs[:5])
        more = f" (and {len(runs) - 5} more gaps)" if len(runs) > 5 else ""
        warn_user(
            f"{len(absent)} calendar day(s) absent from the data were added as missing rows: {listing}{more}.",
            DataWarning,
        )
        out = out.reindex(full)
    return out.reset_index()


def _runs(days: pd.DatetimeIndex) -> list[tuple[pd.Timestamp, pd.Timestamp]]:
    if len(days) == 0:
        return []
    values = days.to_numpy().astype("datetime64[D]").astype(np.int64)
    breaks = np.flatnonzero(np.diff(values) != 1)
    starts = np.r_[0, breaks + 1]
    ends = np.r_[breaks, len(values) - 1]
    return [(days[s], days[e]) for s, e in zip(starts, ends, strict=True)]


def day_of_week(dates: pd.DatetimeIndex | pd.Series) -> pd.Categorical:
    """Day of week as an ordered categorical Mon..Sun."""
    idx = pd.DatetimeIndex(dates)
    return pd.Categorical.from_codes(idx.day_of_week, categories=list(WEEKDAY_NAMES), ordered=True)


def holiday_indicator(dates: pd.DatetimeIndex | pd.Series, country: str, subdivision: str | None = None) -> np.ndarray:
    """1.0 on public holidays of ``country`` (ISO 3166 code, e.g. ``"GB"``), else 0.0.

    Uses the general-purpose ``holidays`` package.
    """
    import holidays as holiday_calendars

    idx = pd.DatetimeIndex(dates)
    years = range(idx.min().year, idx.max().year + 1)
    try:
        calendar = holiday_calendars.country_holidays(country, subdiv=subdivision, years=years)
    except (NotImplementedError, KeyError) as exc:
        raise DataError(
            f"no public-holiday calendar for country {country!r}"
            + (f" subdivision {subdivision!r}" if subdivision else "")
            + "; use an ISO 3166 alpha-2 code such as 'GB', 'FR' or 'US'."
        ) from exc
    days = pd.DatetimeIndex(sorted(calendar.keys()))
    return idx.normalize().isin(days).astype(float)


def season_column(
    dates: pd.Series | pd.DatetimeIndex | pd.DataFrame, warm_months: tuple[int, ...] = (4, 5, 6, 7, 8, 9)
) -> pd.Series:
    """A categorical ``"warm"``/``"cold"`` season of each date, from the calendar months called warm.

    The default warm season, April to September, suits the northern hemisphere (common practice, no
    source); give ``warm_months=(10, 11, 12, 1, 2, 3)`` in the south, or your own months. Use it as an
    effect modifier: ``airhealth.fit(data.assign(season=season_column(data["date"])), ...,
    modifier="season")``.

    Parameters
    ----------
    dates : Series or DatetimeIndex
        Dates (or texts in ISO form); a Series keeps its index.
    warm_months : tuple of int
        Month numbers (1-12) of the warm season; at least one and not all twelve.

    Returns
    -------
    Series
        Named ``"season"``, categorical with categories ``["cold", "warm"]``.

    Examples
    --------
    >>> season_column(pd.Series(pd.to_datetime(["2020-01-15", "2020-07-01"]))).tolist()
    ['cold', 'warm']
    """
    if isinstance(dates, pd.DataFrame):
        raise SpecificationError("season_column takes the date column, e.g. season_column(data['date']).")
    months = _checked_months(warm_months)
    index = dates.index if isinstance(dates, pd.Series) else pd.RangeIndex(len(dates))
    try:
        parsed = pd.DatetimeIndex(pd.to_datetime(pd.Series(np.asarray(dates)), format="ISO8601"))
    except (ValueError, TypeError) as exc:
        raise DataError(f"season_column needs dates (ISO text such as 2015-03-31 or datetimes): {exc}") from exc
    if parsed.isna().any():
        first = int(np.flatnonzero(parsed.isna())[0])
        raise DataError(f"season_column: date missing at row {index[first]!r}; give every row a date.")
    warm = np.isin(parsed.month, months)
    values = pd.Categorical(np.where(warm, "warm", "cold"), categories=["cold", "warm"])
    return pd.Series(values, index=index, name="season")


def _checked_months(warm_months: object) -> list[int]:
    given = [warm_months] if isinstance(warm_months, int) else list(warm_months)  # type: ignore[call-overload]
    bad = [m for m in given if isinstance(m, bool) or not isinstance(m, int | np.integer) or not 1 <= m <= 12]
    if bad:
        raise SpecificationError(f"warm_months must be month numbers 1-12, got {bad[0]!r} in {given!r}.")
    if not given or len(set(given)) == 12:
        raise SpecificationError(
            f"warm_months {given!r} must name some months but not all twelve (two seasons are needed)."
        )
    return sorted({int(m) for m in given})
