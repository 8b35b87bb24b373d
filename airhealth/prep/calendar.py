"""Calendar variables: day of week, public holidays, and completion of a daily calendar."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .._warn import warn_user
from ..errors import DataError, DataWarning

__all__ = ["complete_calendar", "day_of_week", "holiday_indicator"]

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
