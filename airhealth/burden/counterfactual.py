"""The counterfactual level of a burden: a number in the exposure's unit, or a preset converted to that unit.

A preset's unit must match the exposure's unit (``ModelSpec.unit`` of a fit, or the ``unit`` given with a
published coefficient). Where it does not, the value is converted only by the documented conversions of
:mod:`airhealth.prep.units`:

* between µg/m³ and mg/m³ (a factor of 1000, any pollutant);
* between mass concentrations and mixing ratios (ppb, ppm) for O3, NO2, SO2 and CO, by the ideal-gas law at
  the preset's own reference conditions (WHO: 25 °C and 1 atm; EU: 20 °C and 101.3 kPa) with the molecular
  weights of the CRC Handbook (:func:`airhealth.prep.units.conversion_factor`).

Any other mismatch (particles in ppb, an exposure in °C against a pollutant preset) is an error.

A preset is for one pollutant: it is applied only to an exposure of that pollutant. The exposure's pollutant
is the explicit ``pollutant=`` (CLI ``--pollutant``) or, failing that, is read from the column name where it is
recognisable (:func:`pollutant_of_column`); a preset for an exposure whose pollutant cannot be told is refused.
A preset of an annual (or peak-season) mean applied to daily values keeps a note and a warning that the
averaging times differ.
"""

from __future__ import annotations

import math
import numbers
import re
from dataclasses import dataclass

from .._warn import warn_user
from ..errors import DataWarning, SpecificationError
from ..model.spec import display_unit
from ..prep.units import conversion_factor, parse_unit
from .presets import POLLUTANTS, Preset, _normalise, find_preset

__all__ = ["CONCENTRATION_UNITS", "Counterfactual", "pollutant_of_column", "resolve_counterfactual"]

#: Units of concentrations: a counterfactual below zero is impossible in them.
CONCENTRATION_UNITS = ("µg/m³", "mg/m³", "ng/m³", "ppb", "ppm", "ppt")
_GASES = ("o3", "no2", "so2", "co")
_MASS_SCALE = {"ugm3": 1.0, "mgm3": 1000.0}
_EDGE_BEFORE, _EDGE_AFTER = r"(?<![a-z0-9])", r"(?![a-z0-9])"
#: Common spellings of each pollutant inside a column name (lower case), as whole words.
_COLUMN_PATTERNS = {
    "pm2.5": r"pm[ _.\-]?2[ _.,\-]?5|fine ?particles",
    "pm10": r"pm[ _.\-]?10",
    "no2": r"no[ _\-]?2|nitrogen[ _]?dioxide",
    "o3": r"o[ _\-]?3|ozone",
    "so2": r"so[ _\-]?2|sulph?fur[ _]?dioxide",
    "co": r"co|carbon[ _]?monoxide",
    "benzene": r"benzene|c6h6",
}
_ANNUAL = ("annual", "peak-season")


@dataclass(frozen=True)
class Counterfactual:
    """The level exposure is brought down (or up) to, in the exposure's unit, and where it comes from."""

    value: float
    unit: str
    name: str
    source: str
    note: str = ""

    def describe(self) -> str:
        return f"{self.value:.4g} {self.unit} ({self.name}; {self.source})"


def _unit_code(unit: str) -> str | None:
    try:
        return parse_unit(unit)
    except SpecificationError:
        return None


def _converted(value: float, pollutant: str, preset_unit: str, exposure_unit: str, temp: float, kpa: float) -> float:
    """``value`` from the preset's unit into the exposure's, or SpecificationError when no conversion applies."""
    a, b = _unit_code(preset_unit), _unit_code(exposure_unit)
    if a is not None and b is not None:
        if a in _MASS_SCALE and b in _MASS_SCALE:
            return value * _MASS_SCALE[a] / _MASS_SCALE[b]
        if pollutant in _GASES:
            return value * conversion_factor(pollutant, a, b, temperature_c=temp, pressure_kpa=kpa)  # type: ignore[arg-type]
    raise SpecificationError(
        f"the preset is in {preset_unit} but the exposure is in {exposure_unit}, and there is no documented "
        f"conversion for {POLLUTANTS.get(pollutant, pollutant)} between them (µg/m³ <-> mg/m³ for any pollutant; "
        "µg/m³ <-> ppb/ppm for O3, NO2, SO2 and CO only). Give the exposure's unit correctly (unit=... or "
        "--unit), convert the exposure, or give the counterfactual as a number in the exposure's unit."
    )


def _number(given: object) -> float | None:
    if isinstance(given, bool):
        return None
    if isinstance(given, numbers.Real):
        return float(given)
    if isinstance(given, str):
        try:
            return float(given.strip())
        except ValueError:
            return None
    return None


def pollutant_of_column(column: object) -> str | None:
    """The pollutant a column name spells (``"pm2.5"``, ``"pm10"``, ``"no2"``, ``"o3"``, ``"so2"``, ``"co"``,
    ``"benzene"``), or None when it names none or more than one.

    Case is ignored and common spellings are recognised as whole words: ``pm25``, ``PM2.5``, ``pm2_5``,
    ``pm25_mean``, ``NO2``, ``ozone``, ``o3_8h``, ``co``; ``temperature`` or ``x`` give None.

    Examples
    --------
    >>> pollutant_of_column("PM2_5_mean"), pollutant_of_column("ozone"), pollutant_of_column("covid")
    ('pm2.5', 'o3', None)
    """
    name = str(column).strip().lower()
    found = {
        pollutant
        for pollutant, pattern in _COLUMN_PATTERNS.items()
        if re.search(f"{_EDGE_BEFORE}(?:{pattern}){_EDGE_AFTER}", name)
    }
    return found.pop() if len(found) == 1 else None


def _given_pollutant(pollutant: object) -> str:
    key = _normalise(str(pollutant))
    key = key if key in POLLUTANTS else pollutant_of_column(pollutant)
    if key is None:
        raise SpecificationError(
            f"pollutant {pollutant!r} is not known; give one of {', '.join(POLLUTANTS)} (pollutant=... or --pollutant)."
        )
    return key


def _check_pollutant(preset: Preset, exposure: str | None, pollutant: str | None) -> None:
    """Refuse a preset for another pollutant than the exposure's, or when the exposure's cannot be told."""
    if pollutant is not None:
        known, how = _given_pollutant(pollutant), f"pollutant={pollutant!r}"
    else:
        known, how = pollutant_of_column(exposure), f"the column name {exposure!r}"
    if known is None:
        raise SpecificationError(
            f"the preset {preset.name!r} is for {POLLUTANTS[preset.pollutant]}, but the pollutant of the exposure "
            f"{'(unnamed)' if exposure is None else repr(exposure)} cannot be told from its name; give it with "
            "pollutant=... (CLI --pollutant), e.g. "
            f"pollutant={preset.pollutant!r}, or give the counterfactual as a number in the exposure's unit."
        )
    if known != preset.pollutant:
        raise SpecificationError(
            f"the preset {preset.name!r} is for {POLLUTANTS[preset.pollutant]}, but the exposure {exposure!r} is "
            f"{POLLUTANTS[known]} (from {how}); use a preset for {POLLUTANTS[known]} (see preset_table()), or "
            "give the counterfactual as a number in the exposure's unit."
        )


def _averaging_note(preset: Preset) -> str:
    if preset.averaging not in _ANNUAL:
        return ""
    message = (
        f"the preset {preset.name!r} is a level for the {preset.averaging} mean, but it is compared with daily "
        "values: the averaging times differ (a day above it does not exceed the guideline or limit)."
    )
    warn_user(message, DataWarning)
    return message


def resolve_counterfactual(
    given: object, exposure_unit: str, *, exposure: str | None = None, pollutant: str | None = None
) -> Counterfactual:
    """Turn a number or preset name into a :class:`Counterfactual` in ``exposure_unit``.

    A preset must be for the exposure's pollutant: ``pollutant`` when given, else the one the ``exposure``
    column's name spells (:func:`pollutant_of_column`).

    Raises
    ------
    SpecificationError
        A value that is not finite, a negative value for a concentration, an unknown preset (the message
        lists what exists), a preset for another pollutant or for an exposure whose pollutant cannot be
        told, or a preset whose unit cannot be converted to the exposure's unit.

    Warns
    -----
    DataWarning
        An annual or peak-season preset compared with daily values (also kept in the note).
    """
    unit = display_unit(exposure_unit)
    value = _number(given)
    if value is not None:
        _check_value(value, unit, "the counterfactual")
        return Counterfactual(value, unit, "given value", "given by the user")
    if not isinstance(given, str):
        raise SpecificationError(
            f"counterfactual must be a number in the exposure's unit or a preset name such as "
            f"'who-guideline:pm2.5:24h', got {given!r}."
        )
    preset = find_preset(given)
    _check_pollutant(preset, exposure, pollutant)
    averaging = _averaging_note(preset)
    first = "; ".join(n for n in (preset.note, averaging) if n)
    shown = display_unit(preset.unit)
    if shown == unit:
        return Counterfactual(float(preset.value), unit, preset.name, preset.source, first)
    temp, kpa = preset.reference_temperature_c, preset.reference_pressure_kpa
    value = _converted(float(preset.value), preset.pollutant, shown, unit, temp, kpa)
    note = (
        f"{preset.value:g} {shown} converted to {value:.4g} {unit} at {temp:g} °C and {kpa:g} kPa "
        "(airhealth.prep.units)"
    )
    if first:
        note = f"{first}; {note}"
    return Counterfactual(value, unit, preset.name, preset.source, note)


def _check_value(value: float, unit: str, what: str) -> None:
    if not math.isfinite(value):
        raise SpecificationError(f"{what} must be a finite number, got {value!r}.")
    if value < 0 and unit in CONCENTRATION_UNITS:
        raise SpecificationError(
            f"{what} {value:g} {unit} is negative; a concentration cannot be below 0. Give a level of 0 or more "
            "(e.g. a guideline value, or 0 for all exposure above zero)."
        )
