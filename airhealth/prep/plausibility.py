"""Plausible values: pollutant levels for their unit, temperatures in °C, relative humidity in %.

A series in the wrong unit fits without complaint and gives a confident wrong answer: PM2.5 in ng/m³ read as
µg/m³ gives a relative risk per 10 of "1.0000 (1.0000–1.0000)"; a temperature in °F or K is a different
confounder model. The checks here recognise the pollutant from the column name, convert the series to µg/m³
with the unit the user stated (``unit=`` / ``units={...}``), and compare it with ranges no city's daily data
leave:

- values above the highest daily mean on record for the pollutant (or far below zero) are a
  :class:`~airhealth.errors.DataError` naming the values and dates;
- a whole series on the wrong scale (its median far above or below what cities measure) names the likely
  unit and the option to state it.

Negative concentrations: instruments report small negative daily means near zero (measurement noise at
low levels); they are real data and are kept. Values below the pollutant's negative floor (−5 µg/m³ for
most pollutants, common practice, no source) cannot come from noise and are an error.

The ranges are deliberately wide: they catch wrong units and corrupted values, not unusual air.
"""

from __future__ import annotations

import functools
import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._warn import warn_user
from ..errors import DataError, DataWarning, SpecificationError
from .units import MOLECULAR_WEIGHTS, molar_volume, parse_unit
from .validate import _fmt_dates, _listing

__all__ = [
    "POLLUTANT_RANGES",
    "PollutantRange",
    "check_exposure_values",
    "check_humidity",
    "check_temperature",
    "humidity_like",
    "recognise_pollutant",
    "temperature_like",
]


@dataclass(frozen=True)
class PollutantRange:
    """Wide plausible limits for daily values of one pollutant, in µg/m³.

    ``median_low`` / ``median_high`` bound the median of a city's daily series; ``daily_max`` is above any
    daily mean on record; ``negative_floor`` is the lowest daily mean instrument noise produces.
    """

    label: str
    median_low: float
    median_high: float
    daily_max: float
    negative_floor: float
    gas: bool


#: Plausible ranges per pollutant (µg/m³; CO too, 1 mg/m³ = 1000 µg/m³). Sources:
#: - median_low: the cleanest background sites measure about 1 µg/m³ of PM and NO2 and about 0.1 mg/m³ of
#:   CO (from memory); the limits sit ten times lower so that only a series 1000× too small (mg/m³, ppm)
#:   falls below them.
#: - median_high: above the annual means of the most polluted cities in the WHO ambient air quality
#:   database (PM2.5 about 100–200, PM10 about 300–500 µg/m³; from memory), so only a series 1000× too
#:   large (ng/m³, ppb read as ppm) exceeds them.
#: - daily_max: above the highest daily means reported (PM2.5 about 1000 µg/m³ in the worst haze episodes;
#:   PM10 several thousand µg/m³ in desert dust storms; SO2 about 3800 µg/m³ in the London fog of December
#:   1952; ozone hourly peaks of about 600 ppb ≈ 1200 µg/m³ in 1970s Los Angeles; all from memory), with a
#:   margin.
#: - negative_floor: common practice, no source (instrument noise near zero stays within a few µg/m³).
POLLUTANT_RANGES: dict[str, PollutantRange] = {
    "pm25": PollutantRange("PM2.5", 0.1, 400.0, 1500.0, -5.0, gas=False),
    "pm10": PollutantRange("PM10", 0.1, 800.0, 6000.0, -5.0, gas=False),
    "no2": PollutantRange("NO2", 0.1, 300.0, 1000.0, -5.0, gas=True),
    "o3": PollutantRange("O3", 0.1, 400.0, 1500.0, -5.0, gas=True),
    "so2": PollutantRange("SO2", 0.05, 600.0, 5000.0, -5.0, gas=True),
    "co": PollutantRange("CO", 10.0, 30000.0, 150000.0, -200.0, gas=True),
}

#: Column-name tokens naming each pollutant, and suffixes that may follow them in one token
#: (``o3max8h``, ``pm10mean``, ``no2ppb``); anything else (``cooling``, ``cost``) is not a pollutant.
_NAMES = {"pm25": "pm25", "pm10": "pm10", "no2": "no2", "o3": "o3", "ozone": "o3", "so2": "so2", "co": "co"}
_SUFFIX = re.compile(r"^(?:max|mean|avg|ave|daily|mda\d*|\d+h|ppb|ppm|ugm3|mgm3|ngm3)*$")

#: Units by their size relative to µg/m³ (mass) or ppb (mixing ratio). ng/m³ and ppt are accepted here to
#: name a series 1000× off; :func:`airhealth.prep.units.parse_unit` covers the units one converts between.
_EXTRA_UNITS = {"ng/m3": ("mass", 1e-3), "ng/m³": ("mass", 1e-3), "ngm3": ("mass", 1e-3), "ppt": ("mixing", 1e-3)}
_SCALE = {"ugm3": ("mass", 1.0), "mgm3": ("mass", 1e3), "ppb": ("mixing", 1.0), "ppm": ("mixing", 1e3)}
_SHOWN = {("mass", 1e-3): "ng/m³", ("mass", 1.0): "µg/m³", ("mass", 1e3): "mg/m³",
          ("mixing", 1e-3): "ppt", ("mixing", 1.0): "ppb", ("mixing", 1e3): "ppm"}  # fmt: skip


def recognise_pollutant(column: str) -> str | None:
    """The pollutant a column name refers to (``"pm25"``, ``"pm10"``, ``"no2"``, ``"o3"``, ``"so2"``,
    ``"co"``), or ``None``.

    Examples
    --------
    >>> [recognise_pollutant(c) for c in ["PM2.5", "pm_10", "o3_max8h", "ozone", "CO", "cooling", "x"]]
    ['pm25', 'pm10', 'o3', 'o3', 'co', None, None]
    """
    name = str(column).lower().replace("2.5", "25").replace("2_5", "25")
    name = re.sub(r"pm[\s_.-]+(25|10)", r"pm\1", name)
    for token in re.split(r"[^a-z0-9]+", name):
        for prefix, key in _NAMES.items():
            if token.startswith(prefix) and _SUFFIX.match(token[len(prefix) :]):
                return key
    return None


#: :func:`recognise_pollutant` remembered per column name (a pure function of the name).
_pollutant_of = functools.lru_cache(maxsize=4096)(recognise_pollutant)


def _unit_scale(unit: str) -> tuple[str, float] | None:
    key = re.sub(r"\s+", "", str(unit)).lower()
    if key in _EXTRA_UNITS:
        return _EXTRA_UNITS[key]
    try:
        return _SCALE[parse_unit(unit)]
    except SpecificationError:
        return None


def _to_ugm3(pollutant: str, kind: str, size: float) -> float | None:
    """Factor turning values of a unit (kind, size) into µg/m³ for ``pollutant``; None if it does not apply."""
    if kind == "mass":
        return size
    if not POLLUTANT_RANGES[pollutant].gas:
        return None
    return size * MOLECULAR_WEIGHTS[pollutant] / molar_volume(25.0)  # ppb → µg/m³ at 25 °C, 1 atm


def _likely_unit(median_ugm3: float, limits: PollutantRange, kind: str, size: float) -> str | None:
    """The unit 1000× smaller or larger than the stated one if the median only fits the limits that way."""
    if median_ugm3 > limits.median_high and limits.median_low <= median_ugm3 / 1e3 <= limits.median_high:
        return _SHOWN.get((kind, size / 1e3))
    if median_ugm3 < limits.median_low and limits.median_low <= median_ugm3 * 1e3 <= limits.median_high:
        larger = _SHOWN.get((kind, size * 1e3))
        other = "ppm" if kind == "mass" and limits.gas and size == 1.0 else None
        return f"{larger} (or {other})" if larger and other else larger
    return None


def _unit_advice(column: str, unit: str, median: float, likely: str | None) -> str:
    if likely is None:
        return ""
    first = likely.split(" ")[0]
    return (
        f" The series' median, {median:g} {unit}, suggests the values are in {likely}, not {unit}: convert them "
        f"to {unit}, or state the unit with units={{{column!r}: {first!r}}} (command line: --unit {column}={first})."
    )


def _out_of_range(v: np.ndarray, mask: np.ndarray, dates: pd.DatetimeIndex) -> str:
    idx = np.flatnonzero(mask)
    return _listing([f"{d} ({v[i]:g})" for d, i in zip(_fmt_dates(dates[idx]), idx, strict=True)], idx.size)


def check_exposure_values(values: np.ndarray, column: str, unit: str, dates: pd.DatetimeIndex) -> None:
    """Check a pollutant series against the plausible ranges for its pollutant and unit.

    Does nothing when the column name is not a recognised pollutant; warns when it is but the unit is not
    a concentration unit known here (µg/m³, mg/m³, ng/m³, ppb, ppm, ppt).

    Raises
    ------
    DataError
        Values above the pollutant's highest plausible daily mean or below its negative floor (naming values
        and dates, and the likely unit when the whole series is off by 1000×).

    Warns
    -----
    DataWarning
        When the median of the series suggests a unit 1000× smaller or larger than the one stated.
    """
    pollutant = _pollutant_of(column)
    if pollutant is None:
        return
    limits = POLLUTANT_RANGES[pollutant]
    scale = _unit_scale(unit)
    if scale is None:
        warn_user(
            f"column {column!r} looks like {limits.label}, but its unit {unit!r} is not one airhealth knows "
            "(µg/m³, mg/m³, ng/m³, ppb, ppm, ppt), so its values cannot be checked against plausible levels; "
            f"spell the unit as one of these, e.g. units={{{column!r}: 'µg/m³'}} (command line: --unit {column}=ugm3).",
            DataWarning,
        )
        return
    factor = _to_ugm3(pollutant, *scale)
    if factor is None:
        warn_user(
            f"column {column!r} looks like {limits.label}, a particle mass concentration, but its unit is given "
            f"as {unit!r}, a mixing ratio; state the unit of the series with units={{{column!r}: 'µg/m³'}}.",
            DataWarning,
        )
        return
    v = np.asarray(values, dtype=float)
    finite = np.isfinite(v)
    if not finite.any():
        return
    median = float(np.median(v[finite]))
    advice = _unit_advice(column, unit, median, _likely_unit(median * factor, limits, *scale))
    high = finite & (v * factor > limits.daily_max)
    low = finite & (v * factor < limits.negative_floor)
    if high.any() or low.any():
        bound = f"{limits.daily_max / factor:g}" if high.any() else f"{limits.negative_floor / factor:g}"
        side = "above" if high.any() else "below"
        raise DataError(
            f"column {column!r} ({limits.label}, {unit}) has daily values {side} {bound} {unit}, beyond any "
            f"plausible daily level, on {int((high | low).sum())} day(s): {_out_of_range(v, high | low, dates)}."
            + (advice or " Correct the values, or set them missing (na_values=[...], command line --na-values).")
        )
    if advice:
        warn_user(f"column {column!r} ({limits.label}) is on an unlikely scale for {unit}.{advice}", DataWarning)


_TEMPERATURE = re.compile(
    r"^(?:temp|temperature|tmean|tavg|tmax|tmin|t2m|airtemp|dewpoint|dewp|tdew)(?:mean|max|min|avg|c|lag\d*|\d+)?$"
)
_HUMIDITY_TOKENS = frozenset({"rh", "relhum", "hum", "hurs"})

#: A daily temperature (mean, minimum or maximum) in °C lies between the lowest air temperature on record,
#: −89.2 °C (Vostok, 1983), and the highest, about 54–57 °C (Death Valley) (World Meteorological
#: Organization archive of weather extremes; from memory).
TEMPERATURE_RANGE_C = (-90.0, 57.0)


def temperature_like(column: str) -> bool:
    """Whether a column name reads as a temperature (``temperature``, ``temp_mean``, ``tmax``, ``dewpoint``).

    Examples
    --------
    >>> [temperature_like(c) for c in ["temperature", "Temp", "tmax_c", "tmean2", "temporal_trend", "pm25"]]
    [True, True, True, True, False, False]
    """
    tokens = re.split(r"[^a-z0-9]+", str(column).lower())
    return any(_TEMPERATURE.match(t) for t in tokens if t) or "temperature" in str(column).lower()


def humidity_like(column: str) -> bool:
    """Whether a column name reads as relative humidity (``humidity``, ``rh``, ``rel_hum``), not absolute.

    Examples
    --------
    >>> [humidity_like(c) for c in ["humidity", "RH", "rel_hum", "abs_humidity", "human_cases"]]
    [True, True, True, False, False]
    """
    name = str(column).lower()
    if any(word in name for word in ("abs", "spec", "mixing", "dew")):
        return False
    return "humid" in name or bool(_HUMIDITY_TOKENS & set(re.split(r"[^a-z0-9]+", name)))


def check_temperature(values: np.ndarray, column: str, dates: pd.DatetimeIndex) -> None:
    """Require a temperature series in °C; a series in K or °F is named with the conversion.

    Rules: a median above 150 can only be kelvins; values above 57 °C (beyond the highest air temperature
    on record) with a median from 25 to 120 read as °F; other values outside −90…57 °C are named.

    Raises
    ------
    DataError
        Naming the column, the likely unit and the conversion, or the implausible values and their dates.
    """
    v = np.asarray(values, dtype=float)
    finite = np.isfinite(v)
    if not finite.any():
        return
    median = float(np.median(v[finite]))
    lo, hi = TEMPERATURE_RANGE_C
    if median > 150:
        raise DataError(
            f"column {column!r} looks like a temperature in kelvins (median {median:g}); the model expects °C. "
            f"Convert it first: data[{column!r}] - 273.15."
        )
    outside = finite & ((v > hi) | (v < lo))
    if not outside.any():
        return
    if (v[finite] > hi).any() and 25 <= median <= 120:
        raise DataError(
            f"column {column!r} looks like a temperature in °F (median {median:g}, values up to "
            f"{np.max(v[finite]):g}); the model expects °C. Convert it first: (data[{column!r}] - 32) * 5 / 9."
        )
    raise DataError(
        f"column {column!r} has temperatures outside {lo:g}…{hi:g} °C, beyond any recorded on Earth, on "
        f"{int(outside.sum())} day(s): {_out_of_range(v, outside, dates)}. Correct them or set them missing "
        "(na_values=[...]); if the column is in °F or K, convert it to °C."
    )


def check_humidity(values: np.ndarray, column: str, dates: pd.DatetimeIndex) -> None:
    """Require relative humidity in percent (0–100).

    Raises
    ------
    DataError
        Values below 0 or above 101 % (a 1-point margin for sensor readings of saturated air; common
        practice, no source), naming values and dates.

    Warns
    -----
    DataWarning
        When every value lies within 0–1 (a fraction): the model is unaffected (a spline does not depend
        on the scale), but tables and figures will show fractions.
    """
    v = np.asarray(values, dtype=float)
    finite = np.isfinite(v)
    if not finite.any():
        return
    outside = finite & ((v < 0) | (v > 101))
    if outside.any():
        raise DataError(
            f"column {column!r} (relative humidity) has values outside 0–100 % on {int(outside.sum())} day(s): "
            f"{_out_of_range(v, outside, dates)}. Correct them or set them missing (na_values=[...])."
        )
    if np.max(v[finite]) <= 1.0 and np.ptp(v[finite]) > 0:
        warn_user(
            f"column {column!r} (relative humidity) lies within 0–1: it looks like a fraction, not percent. "
            f"The fit is unaffected; multiply by 100 (data[{column!r}] * 100) for tables in percent.",
            DataWarning,
        )
