"""Time strata of the time-stratified case-crossover: year × month × day of week.

Each day belongs to the stratum of the days of the same calendar month and year that fall on the same day
of the week (4 or 5 days). Comparing an event day with the other days of its stratum is the time-stratified
referent scheme, which avoids the overlap bias of other referent choices (Janes, Sheppard & Lumley 2005)
and controls by design for long-term trend, season and day of week. Fitting the counts with one free
intercept per stratum (conditional Poisson) gives the conditional-logistic case-crossover estimate
(Armstrong, Gasparrini & Tobias 2014).

Strata without events on the days used carry no information and are left out, as are strata with a single
usable day (its count is fitted exactly by its own intercept); both are counted (:class:`StrataUsed`).

References
----------
Janes H, Sheppard L, Lumley T (2005). Case-crossover analyses of air pollution exposure data: referent
selection strategies and their implications for bias. Epidemiology 16:717–726.
Armstrong BG, Gasparrini A, Tobias A (2014). Conditional Poisson models: a flexible alternative to
conditional logistic case cross-over analysis. BMC Med Res Methodol 14:122.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ...errors import DataError

__all__ = ["NO_EVENTS", "SINGLE_DAY", "StrataUsed", "stratum_codes", "used_strata"]

#: Reasons a usable day is left out of a case-crossover fit (``Design.dropped``).
NO_EVENTS = "stratum without events"
SINGLE_DAY = "only usable day of its stratum"


def stratum_codes(calendar: pd.DatetimeIndex) -> np.ndarray:
    """The stratum of each day as ``((year × 12) + month − 1) × 7 + day of week`` (Monday = 0).

    >>> stratum_codes(pd.DatetimeIndex(["2020-01-06", "2020-01-13", "2020-01-07", "2020-02-03"])).tolist()
    [169659, 169659, 169660, 169666]
    """
    months = calendar.year.to_numpy(dtype=np.int64) * 12 + calendar.month.to_numpy(dtype=np.int64) - 1
    return months * 7 + calendar.day_of_week.to_numpy(dtype=np.int64)


@dataclass(frozen=True)
class StrataUsed:
    """The strata of a case-crossover fit.

    Attributes
    ----------
    codes : ndarray of int
        Stratum of each day used (dense codes ``0 .. n_strata - 1``, in the order of the days used).
    n_strata : int
        Strata that enter the fit (at least one event and at least two usable days).
    n_strata_without_events : int
        Strata whose usable days have no events (left out: they carry no information).
    n_strata_single_day : int
        Strata with events but a single usable day (left out: the day is fitted exactly by its intercept).
    """

    codes: np.ndarray
    n_strata: int
    n_strata_without_events: int
    n_strata_single_day: int


def used_strata(
    calendar: pd.DatetimeIndex, y: np.ndarray, used: np.ndarray, outcome: str
) -> tuple[np.ndarray, np.ndarray, StrataUsed]:
    """The days a case-crossover fit uses, the reasons for the days it leaves out, and its strata.

    Parameters
    ----------
    calendar : DatetimeIndex
        The full daily calendar.
    y : ndarray
        Daily counts on the calendar.
    used : ndarray of bool
        Days usable by the model (outcome, exposure and confounders present).
    outcome : str
        Name of the outcome, for the error message.

    Returns
    -------
    used : ndarray of bool
        ``used`` without the days of strata without events or with one usable day.
    reasons : ndarray of object
        For each calendar day newly left out, :data:`NO_EVENTS` or :data:`SINGLE_DAY` ("" otherwise).
    strata : StrataUsed

    Raises
    ------
    DataError
        When no stratum has events on two or more usable days.
    """
    codes = stratum_codes(calendar)
    rows = np.flatnonzero(used)
    labels, inverse = np.unique(codes[rows], return_inverse=True)
    inverse = inverse.reshape(-1)
    events = np.bincount(inverse, weights=y[rows], minlength=labels.size)
    days = np.bincount(inverse, minlength=labels.size)
    empty, single = events <= 0, (events > 0) & (days == 1)
    reasons = np.full(len(calendar), "", dtype=object)
    reasons[rows[empty[inverse]]] = NO_EVENTS
    reasons[rows[single[inverse]]] = SINGLE_DAY
    keep = ~(empty | single)
    if not keep.any():
        raise DataError(_none_left_message(outcome, calendar[rows], int(empty.sum()), int(single.sum())))
    new_used = used.copy()
    new_used[rows[~keep[inverse]]] = False
    kept = inverse[keep[inverse]]
    dense = np.cumsum(keep) - 1  # the kept strata renumbered 0 .. n - 1, in calendar order
    info = StrataUsed(dense[kept], int(keep.sum()), int(empty.sum()), int(single.sum()))
    return new_used, reasons, info


def _none_left_message(outcome: str, dates: pd.DatetimeIndex, n_empty: int, n_single: int) -> str:
    span = f"{dates[0]:%Y-%m-%d} to {dates[-1]:%Y-%m-%d}" if len(dates) else "no usable days"
    return (
        f"no case-crossover stratum (same year, month and day of week) has events on two or more usable days "
        f"of outcome {outcome!r} ({span}): {n_empty} strata have no events and {n_single} have a single usable "
        "day. A case-crossover compares each event day with other days of its stratum: fill the gaps in the "
        "exposure and confounder series, use a longer series, or use the time-series design."
    )
