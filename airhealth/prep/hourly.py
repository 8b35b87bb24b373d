"""Daily exposure statistics from hourly data, with the validity rules of the EU and US regulations.

Three daily statistics are computed for each monitor: the 24-hour mean (``"mean"``), the daily maximum 1-hour
value (``"max1h"``) and the daily maximum of the running 8-hour means (``"max8h"``, used for ozone). A day
either meets its convention's completeness rule, and gets a value, or does not, and gets ``NaN`` with the
reason written beside it. The rules (the clause each comes from is in :func:`validity_rule`):

=========  =========================================  =====================================================
statistic  ``convention="eu"`` (Directive 2008/50/EC)  ``convention="us"`` (40 CFR Part 50)
=========  =========================================  =====================================================
mean       ≥ 18 of the day's hourly values             ≥ 18 of 24 hours (App. N); optionally also valid if
                                                       the mean with missing hours set to 0 exceeds a level
max1h      ≥ 18 hourly values (no EU rule for this      ≥ 18 hours (App. S, T); optionally also valid if the
           statistic; the 24-hour criterion is used)    maximum exceeds a level
max8h      8-h mean valid with ≥ 6 of 8 hours; the      8-h mean valid with ≥ 6 of 8 hours; labelled by its
           mean is assigned to the day of its last      first hour; the 17 means starting 07:00–23:00 count
           hour (24 per day, first 17:00–01:00);        and ≥ 13 of them must be valid (App. U); optionally
           ≥ 18 valid 8-h means per day                 also valid if the maximum exceeds a level
=========  =========================================  =====================================================

Days run from midnight to midnight in local standard time by default (``day_clock="standard"``): every day
has 24 hours, also on daylight-saving days, and the US EPA (AQS) and the EU ozone rules (CET) both count in
standard time. ``day_clock="wall"`` forms days on the local clock instead (23 hours in spring, 25 in autumn;
the thresholds stay 18 hours / 18 or 13 8-h means). The 8-hour windows always span eight consecutive real
hours, so a daylight-saving change never shortens or lengthens one.

Note that a day's maximum 8-h mean may exceed the same day's maximum 1-h value, because its windows reach
into the previous evening (EU) or the next morning (US); it never exceeds the largest hourly value inside
its windows.

References
----------
.. [1] Directive 2008/50/EC of the European Parliament and of the Council of 21 May 2008 on ambient air quality
   and cleaner air for Europe. OJ L 152, 11.6.2008. Annex VII, Section A.2 (ozone: criteria for aggregating
   data — 8-hour values need 75 % of the values = 6 hours; the maximum daily 8-hour mean needs 75 % of the
   hourly running 8-hour averages = 18 per day) and Section B (the maximum daily 8-hour mean: running means
   updated each hour, each assigned to the day on which it ends; first period 17:00 previous day – 01:00, last
   16:00–24:00). Annex XI, Section A (other pollutants): 24-hour values need 75 % of the hourly averages, i.e.
   18 of 24. Checked against the published text (2026-12-02); "18 hours" is our arithmetic for 75 % of 24.
.. [2] US EPA, 40 CFR Part 50, Appendix U (Interpretation of the primary and secondary NAAQS for ozone, 2015):
   the daily maximum 8-hour average is the highest of the 17 consecutive 8-hour periods from 07:00–15:00 to
   23:00–07:00 the next day, and the level of the standard is 0.070 ppm (checked against the published text,
   2026-12-02). From memory, not yet checked: running averages stored in their start hour, valid with ≥ 6
   hours (divisor = hours present); a daily maximum valid with ≥ 13 valid periods or if it exceeds the level;
   the substitution rule for 8-hour periods with fewer than 6 hours is the part remembered least surely.
.. [3] US EPA, 40 CFR Part 50, Appendix N (PM2.5), section 1 and 3: 24-hour averages from hourly data,
   midnight to midnight local standard time, valid with ≥ 18 hours (divisor = hours present), or if the
   average with zero substituted for the missing hours exceeds the level of the standard. From memory.
.. [4] US EPA, 40 CFR Part 50, Appendix S (NO2) and Appendix T (SO2): a daily maximum 1-hour value is valid if
   ≥ 75 % (18) of the day's hours are present or if it exceeds the level of the standard. From memory.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
import pandas as pd

from .._choices import check_choice
from ..errors import SpecificationError
from .hourly_input import DuplicateRule, HourLabel, NegativeRule, TimesIn, clean_hourly, standard_offsets

__all__ = [
    "Convention",
    "DayClock",
    "Statistic",
    "ValidityRule",
    "aggregate_daily",
    "count_column",
    "daily_statistic",
    "validity_rule",
]

Statistic = Literal["mean", "max1h", "max8h"]
Convention = Literal["eu", "us"]
DayClock = Literal["standard", "wall"]

_HOUR = pd.Timedelta(hours=1)
_DAY = pd.Timedelta(days=1)


@dataclass(frozen=True)
class ValidityRule:
    """Completeness rule of one daily statistic under one convention.

    Attributes
    ----------
    statistic, convention : str
    min_hours : int
        Valid hourly values a day needs (``mean`` and ``max1h``).
    window_hours, min_hours_per_window : int
        Length of a running mean (8) and the valid hours it needs (6).
    window_label : {"end", "start"}
        Which hour of a running window names it, and so gives its day.
    window_hours_of_day : tuple of int
        Hours of the day (of the labelling hour) whose windows count towards the daily maximum.
    min_windows : int
        Valid running means the daily maximum needs.
    exceedance_level : float or None
        US only: a day (or 8-h window) failing the completeness rule is still valid if its value, with
        missing hours counted as zero, exceeds this level (in the units of the data).
    source : str
        The clause the rule comes from.
    """

    statistic: Statistic
    convention: Convention
    min_hours: int = 18
    window_hours: int = 8
    min_hours_per_window: int = 6
    window_label: Literal["end", "start"] = "end"
    window_hours_of_day: tuple[int, ...] = tuple(range(24))
    min_windows: int = 18
    exceedance_level: float | None = None
    source: str = ""


def validity_rule(
    statistic: Statistic, convention: Convention = "eu", *, exceedance_level: float | None = None
) -> ValidityRule:
    """Return the completeness rule for ``statistic`` under ``convention`` (see the module table).

    Parameters
    ----------
    statistic : {"mean", "max1h", "max8h"}
    convention : {"eu", "us"}, default "eu"
    exceedance_level : float, optional
        US convention only: the level of the standard for the "valid if it exceeds the level" clauses
        (e.g. 70 ppb for 8-h ozone, Appendix U, checked; 35 µg/m³ for 24-h PM2.5, 100 ppb for 1-h NO2 and
        75 ppb for 1-h SO2 from memory). Without it those clauses are not applied.
    """
    check_choice("statistic", statistic, Statistic)
    check_choice("convention", convention, Convention)
    if convention == "eu":
        if exceedance_level is not None:
            raise SpecificationError("exceedance_level applies to convention='us' only; the EU rules have none.")
        sources = {
            "mean": "Directive 2008/50/EC, Annex XI A (24-hour values: 75 % of the hourly values = 18 of 24)",
            "max1h": "no EU rule for a daily maximum 1-hour value; the 24-hour criterion (18 hours) is used",
            "max8h": "Directive 2008/50/EC, Annex VII A.2 and B (8-h: 6 of 8 hours; daily max: 18 of 24 8-h means "
            "ending in the day)",
        }
        return ValidityRule(statistic, "eu", source=sources[statistic])
    sources = {
        "mean": "40 CFR Part 50, Appendix N (24-hour: 18 of 24 hours; from memory)",
        "max1h": "40 CFR Part 50, Appendices S and T (daily max 1-hour: 18 of 24 hours; from memory)",
        "max8h": "40 CFR Part 50, Appendix U (daily max of the 17 periods starting 07:00-23:00; the "
        "completeness rules 6 of 8 hours and 13 of 17 periods from memory)",
    }
    return ValidityRule(
        statistic,
        "us",
        window_label="start",
        window_hours_of_day=tuple(range(7, 24)),
        min_windows=13,
        exceedance_level=None if exceedance_level is None else float(exceedance_level),
        source=sources[statistic],
    )


def count_column(statistic: Statistic) -> str:
    """Name of the output column counting what a day's value rests on: ``n_hours`` or ``n_8h_means``."""
    return "n_8h_means" if statistic == "max8h" else "n_hours"


def _hour_grid(hours: pd.Series, values: pd.Series) -> tuple[pd.Timestamp, np.ndarray]:
    """Values on a regular hourly grid (NaN where missing), padded by a day each side."""
    start = hours.min().normalize() - _DAY
    stop = hours.max().normalize() + 2 * _DAY
    grid = np.full((stop - start) // _HOUR, np.nan)
    grid[((hours - start) // _HOUR).to_numpy()] = values.to_numpy()
    return start, grid


def _day_clock(start: pd.Timestamp, n: int, day_clock: DayClock, timezone: str | None) -> pd.DatetimeIndex:
    """Clock time (naive) of each grid hour on which days are formed."""
    lst = pd.date_range(start, periods=n, freq="h", unit="us")
    if day_clock == "standard":
        return lst
    if timezone is None:
        raise SpecificationError("day_clock='wall' needs the timezone of the monitors.")
    offsets = standard_offsets(timezone, lst.year.unique())
    utc = lst - pd.to_timedelta(pd.Series(lst.year).map(offsets).to_numpy())
    return utc.tz_localize("UTC").tz_convert(timezone).tz_localize(None)


def _per_day(codes: np.ndarray, values: np.ndarray, ndays: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Count of non-missing values, their sum and their maximum per day code."""
    present = ~np.isnan(values)
    count = np.bincount(codes, weights=present, minlength=ndays)
    total = np.bincount(codes, weights=np.where(present, values, 0.0), minlength=ndays)
    largest = pd.Series(values).groupby(codes).max().reindex(range(ndays)).to_numpy()
    return count.astype(int), total, largest


def _window_means(grid: np.ndarray, rule: ValidityRule) -> np.ndarray:
    """Running means over ``window_hours`` consecutive hours, indexed by the window's first hour."""
    windows = np.lib.stride_tricks.sliding_window_view(grid, rule.window_hours)
    present = (~np.isnan(windows)).sum(axis=1)
    total = np.where(np.isnan(windows), 0.0, windows).sum(axis=1)
    means = np.full(len(windows), np.nan)
    ok = present >= rule.min_hours_per_window
    means[ok] = total[ok] / present[ok]
    if rule.exceedance_level is not None:
        substituted = total / rule.window_hours  # missing hours counted as zero
        rescue = ~ok & (present > 0) & (substituted > rule.exceedance_level)
        means[rescue] = substituted[rescue]
    return means


def _one_monitor(part: pd.DataFrame, rule: ValidityRule, day_clock: DayClock, timezone: str | None):
    start, grid = _hour_grid(part["hour"], part["value"])
    clock = _day_clock(start, len(grid), day_clock, timezone)
    days, codes = np.unique(clock.normalize().to_numpy(), return_inverse=True)
    ndays = len(days)
    hours_count, hours_sum, hours_max = _per_day(codes, grid, ndays)
    level = rule.exceedance_level
    if rule.statistic in ("mean", "max1h"):
        count = hours_count
        value = hours_sum / np.maximum(count, 1) if rule.statistic == "mean" else hours_max
        valid = count >= rule.min_hours
        if level is not None:
            check = hours_sum / 24.0 if rule.statistic == "mean" else hours_max
            rescued = ~valid & (count > 0) & (check > level)
            value = np.where(rescued, check, value)
            valid = valid | rescued
        need = f"fewer than {rule.min_hours} valid hours"
    else:
        means = _window_means(grid, rule)
        label = np.arange(len(means)) + (rule.window_hours - 1 if rule.window_label == "end" else 0)
        counted = np.isin(clock.hour.to_numpy()[label], rule.window_hours_of_day)
        count, _, value = _per_day(codes[label][counted], means[counted], ndays)
        valid = count >= rule.min_windows
        if level is not None:
            valid = valid | (value > level)
        need = f"fewer than {rule.min_windows} of {len(rule.window_hours_of_day)} valid 8-h means"
    reason = np.where(valid, None, np.where(hours_count == 0, "no data", need))
    observed = clock[((part["hour"] - start) // _HOUR).to_numpy()].normalize()
    keep = (days >= observed.min()) & (days <= observed.max())
    return pd.DataFrame(
        {
            "date": days[keep],
            "value": np.where(valid, value, np.nan)[keep],
            count_column(rule.statistic): count[keep],
            "valid": valid[keep],
            "reason": pd.array(reason[keep], dtype="string"),
        }
    )


def aggregate_daily(
    clean: pd.DataFrame,
    *,
    statistic: Statistic = "mean",
    convention: Convention = "eu",
    day_clock: DayClock = "standard",
    timezone: str | None = None,
    exceedance_level: float | None = None,
    name: str = "value",
) -> pd.DataFrame:
    """Daily statistic per monitor from the output of :func:`~airhealth.prep.hourly_input.clean_hourly`.

    Returns
    -------
    DataFrame
        Columns ``monitor``, ``date``, ``name`` (NaN on invalid days), the count (``n_hours`` or
        ``n_8h_means``), ``valid`` and ``reason`` (why a day is invalid; missing for valid days). One row per
        day from each monitor's first to last reading, in day-clock days.
    """
    check_choice("day_clock", day_clock, DayClock)
    rule = validity_rule(statistic, convention, exceedance_level=exceedance_level)
    parts = []
    for monitor_id, part in clean.groupby("monitor", sort=True):
        one = _one_monitor(part, rule, day_clock, timezone)
        parts.append(one.assign(monitor=monitor_id))
    out = pd.concat(parts, ignore_index=True).rename(columns={"value": name})
    return out[["monitor", "date", name, count_column(statistic), "valid", "reason"]]


def daily_statistic(
    hourly: pd.DataFrame,
    *,
    time: str,
    value: str,
    statistic: Statistic = "mean",
    convention: Convention = "eu",
    monitor: str | None = None,
    hour_label: HourLabel = "start",
    timezone: str | None = None,
    times_in: TimesIn = "standard",
    day_clock: DayClock = "standard",
    exceedance_level: float | None = None,
    time_format: str | None = None,
    negative: NegativeRule = "keep",
    duplicates: DuplicateRule = "error",
) -> pd.DataFrame:
    """Daily mean, maximum 1-hour or maximum 8-hour value per monitor from raw hourly readings.

    Reads and checks the readings with :func:`~airhealth.prep.hourly_input.clean_hourly` (``time``,
    ``value``, ``monitor``, ``hour_label``, ``timezone``, ``times_in``, ``time_format``, ``negative`` and
    ``duplicates`` are passed to it and documented there), then applies :func:`aggregate_daily`.

    Parameters
    ----------
    statistic : {"mean", "max1h", "max8h"}, default "mean"
    convention : {"eu", "us"}, default "eu"
        Completeness rules; see the module docstring and :func:`validity_rule`.
    day_clock : {"standard", "wall"}, default "standard"
        Days in local standard time (24 hours each) or on the local clock (needs ``timezone``).
    exceedance_level : float, optional
        US convention only; see :func:`validity_rule`.

    Returns
    -------
    DataFrame
        As :func:`aggregate_daily`, with the value column named after ``value``.

    Examples
    --------
    >>> import pandas as pd
    >>> hourly = pd.DataFrame({"time": pd.date_range("2022-06-01", periods=24, freq="h"),
    ...                        "o3": [float(h) for h in range(24)]})
    >>> daily_statistic(hourly, time="time", value="o3")[["date", "o3", "n_hours"]]
            date    o3  n_hours
    0 2022-06-01  11.5       24
    """
    clean = clean_hourly(
        hourly,
        time=time,
        value=value,
        monitor=monitor,
        hour_label=hour_label,
        timezone=timezone,
        times_in=times_in,
        time_format=time_format,
        negative=negative,
        duplicates=duplicates,
    )
    return aggregate_daily(
        clean,
        statistic=statistic,
        convention=convention,
        day_clock=day_clock,
        timezone=timezone,
        exceedance_level=exceedance_level,
        name=value,
    )
