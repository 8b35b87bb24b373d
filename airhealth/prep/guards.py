"""The value guards every model front end runs on its daily frame, in one place.

:func:`airhealth.model.design.model_frame` (used by ``fit``, ``compare``, sweeps, reports and the command
line) calls :func:`clean_values` and :func:`check_values` with the roles of the columns; the checks that need
the days a model uses and its parameter count are :func:`airhealth.prep.degenerate.check_usable_days`, called
by the design builder. This module knows nothing of models: it receives the column names and their roles.

Order of the guards (each raises :class:`~airhealth.errors.DataError` naming column, values, dates and the
remedy, or warns with :class:`~airhealth.errors.DataWarning`):

1. declared missing-value codes (``na_values``) become missing; text columns become numbers, and any other
   text is named (:mod:`~airhealth.prep.missing_codes`);
2. common sentinels (-999, 9999, ...) far outside their series are named;
3. (the caller checks counts, infinite values and entirely missing columns);
4. the exposure's (and co-pollutants') level for its pollutant and unit, temperatures in °C, humidity in %
   (:mod:`~airhealth.prep.plausibility`);
5. an outcome without events or variation, an exposure that never varies or is measured in one season only
   (:mod:`~airhealth.prep.degenerate`).
"""

from __future__ import annotations

import functools
from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .degenerate import check_series
from .missing_codes import apply_na_values, check_missing_codes
from .plausibility import check_exposure_values, check_humidity, check_temperature, humidity_like, temperature_like

__all__ = ["ColumnRoles", "check_values", "clean_values"]


@dataclass(frozen=True)
class ColumnRoles:
    """What each column of a daily frame is, for the guards.

    Parameters
    ----------
    date, outcome, exposure : str
        The date, count and exposure columns.
    unit : str
        Unit of the exposure (e.g. ``"µg/m³"``, ``"ppb"``).
    numeric : tuple of str
        Every column read as numbers (outcome, exposure, numeric confounders, offset).
    temperature, humidity : str or None
        Columns declared as temperature (°C) and relative humidity (%); other numeric columns whose names
        read as temperature or humidity (``tmax``, ``rh``) are checked the same way.
    no_codes : tuple of str
        Numeric columns not searched for missing-value codes (e.g. an offset such as log population).
    copollutants : tuple of (str, str)
        Other pollutant columns and their units, checked for plausibility as the exposure is.
    """

    date: str
    outcome: str
    exposure: str
    unit: str
    numeric: tuple[str, ...]
    temperature: str | None = None
    humidity: str | None = None
    no_codes: tuple[str, ...] = ()
    copollutants: tuple[tuple[str, str], ...] = ()

    def temperatures(self) -> list[str]:
        named = [c for c in self.numeric if c not in (self.outcome, *self.no_codes) and _temperature_name(c)]
        return list(dict.fromkeys([*([self.temperature] if self.temperature else []), *named]))

    def humidities(self) -> list[str]:
        named = [c for c in self.numeric if c not in (self.outcome, *self.no_codes) and _humidity_name(c)]
        found = [*([self.humidity] if self.humidity else []), *named]
        return [c for c in dict.fromkeys(found) if c not in self.temperatures()]


#: The name tests, remembered per column name (pure functions of the name; a few regular expressions each,
#: ~0.1 ms per fit when run afresh)
_temperature_name = functools.lru_cache(maxsize=4096)(temperature_like)
_humidity_name = functools.lru_cache(maxsize=4096)(humidity_like)


def _values(frame: pd.DataFrame, column: str) -> np.ndarray:
    return frame[column].to_numpy(dtype=float, na_value=np.nan)


def clean_values(
    frame: pd.DataFrame, roles: ColumnRoles, na_values: Iterable[object], dates: pd.DatetimeIndex | None = None
) -> pd.DataFrame:
    """A copy of ``frame`` with declared codes missing and text made numeric; raises on leftover sentinels.

    ``dates`` (the date column as an index, for messages) is read from ``frame`` when not given. The
    caller's frame is not modified.
    """
    dates = pd.DatetimeIndex(frame[roles.date]) if dates is None else dates
    out = apply_na_values(frame, roles.numeric, na_values, dates, counts=[roles.outcome])
    searched = [c for c in roles.numeric if c not in roles.no_codes]
    check_missing_codes(out, searched, dates, counts=[roles.outcome])
    return out


def check_values(frame: pd.DataFrame, roles: ColumnRoles, dates: pd.DatetimeIndex | None = None) -> None:
    """Plausibility of the exposure, temperatures and humidity; degenerate outcome or exposure series.

    ``dates`` (the date column as an index, for messages) is read from ``frame`` when not given.
    """
    dates = pd.DatetimeIndex(frame[roles.date]) if dates is None else dates
    exposure = _values(frame, roles.exposure)
    check_exposure_values(exposure, roles.exposure, roles.unit, dates)
    for column, unit in roles.copollutants:
        check_exposure_values(_values(frame, column), column, unit, dates)
    for column in roles.temperatures():
        check_temperature(_values(frame, column), column, dates)
    for column in roles.humidities():
        check_humidity(_values(frame, column), column, dates)
    check_series(_values(frame, roles.outcome), exposure, dates, roles.outcome, roles.exposure, roles.date)
