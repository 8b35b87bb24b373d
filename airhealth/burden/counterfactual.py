"""The counterfactual level of a burden: a number in the exposure's unit, or a preset converted to that unit.

A preset's unit must match the exposure's unit (``ModelSpec.unit`` of a fit, or the ``unit`` given with a
published coefficient). Where it does not, the value is converted only by the documented conversions of
:mod:`airhealth.prep.units`:

* between µg/m³ and mg/m³ (a factor of 1000, any pollutant);
* between mass concentrations and mixing ratios (ppb, ppm) for O3, NO2, SO2 and CO, by the ideal-gas law at
  the preset's own reference conditions (WHO: 25 °C and 1 atm; EU: 20 °C and 101.3 kPa) with the molecular
  weights of the CRC Handbook (:func:`airhealth.prep.units.conversion_factor`).

Any other mismatch (particles in ppb, an exposure in °C against a pollutant preset) is an error.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

from ..errors import SpecificationError
from ..model.spec import display_unit
from ..prep.units import conversion_factor, parse_unit
from .presets import POLLUTANTS, find_preset

__all__ = ["CONCENTRATION_UNITS", "Counterfactual", "resolve_counterfactual"]

#: Units of concentrations: a counterfactual below zero is impossible in them.
CONCENTRATION_UNITS = ("µg/m³", "mg/m³", "ng/m³", "ppb", "ppm", "ppt")
_GASES = ("o3", "no2", "so2", "co")
_MASS_SCALE = {"ugm3": 1.0, "mgm3": 1000.0}


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


def resolve_counterfactual(given: object, exposure_unit: str) -> Counterfactual:
    """Turn a number or preset name into a :class:`Counterfactual` in ``exposure_unit``.

    Raises
    ------
    SpecificationError
        A value that is not finite, a negative value for a concentration, an unknown preset (the message
        lists what exists), or a preset whose unit cannot be converted to the exposure's unit.
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
    shown = display_unit(preset.unit)
    if shown == unit:
        return Counterfactual(float(preset.value), unit, preset.name, preset.source, preset.note)
    temp, kpa = preset.reference_temperature_c, preset.reference_pressure_kpa
    value = _converted(float(preset.value), preset.pollutant, shown, unit, temp, kpa)
    note = (
        f"{preset.value:g} {shown} converted to {value:.4g} {unit} at {temp:g} °C and {kpa:g} kPa "
        "(airhealth.prep.units)"
    )
    if preset.note:
        note = f"{preset.note}; {note}"
    return Counterfactual(value, unit, preset.name, preset.source, note)


def _check_value(value: float, unit: str, what: str) -> None:
    if not math.isfinite(value):
        raise SpecificationError(f"{what} must be a finite number, got {value!r}.")
    if value < 0 and unit in CONCENTRATION_UNITS:
        raise SpecificationError(
            f"{what} {value:g} {unit} is negative; a concentration cannot be below 0. Give a level of 0 or more "
            "(e.g. a guideline value, or 0 for all exposure above zero)."
        )
