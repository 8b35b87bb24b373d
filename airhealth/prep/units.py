"""Unit conversion for gaseous pollutants: mixing ratios (ppb, ppm) and mass concentrations (µg/m³, mg/m³).

For an ideal gas, a mixing ratio ``x`` (mol/mol) corresponds to the mass concentration
``c = x · M · P / (R · T)``. With ``x`` in ppb (1e-9), ``M`` in g/mol and the molar volume
``Vm = R · T / P`` in L/mol, this is

    c [µg/m³] = x [ppb] · M / Vm,

because 1e-9 mol/mol · M g/mol / (Vm L/mol) = M / Vm · 1e-9 g/L = M / Vm µg/m³. The same factor turns ppm into
mg/m³. At 25 °C and 1 atm (101.325 kPa) ``Vm`` = 24.465 L/mol with the CODATA 2018 gas constant; many tables
round it to 24.45 L/mol. EU Directive 2008/50/EC standardises gaseous pollutants to 293 K (20 °C) and
101.3 kPa (``Vm`` ≈ 24.04–24.06 L/mol); the WHO 2021 guidelines convert at 25 °C and 1 atm.

References
----------
.. [1] Rumble JR (ed.). CRC Handbook of Chemistry and Physics. CRC Press (molecular weights O3 48.00, NO2 46.01,
   SO2 64.07, CO 28.01 g/mol, as the handbook lists them; the sums of the IUPAC conventional atomic weights
   O 15.999, N 14.007, S 32.06, C 12.011 agree to 0.01 g/mol: 48.00, 46.01, 64.06, 28.01).
.. [2] Tiesinga E, Mohr PJ, Newell DB, Taylor BN (2021). CODATA recommended values of the fundamental physical
   constants: 2018. Rev Mod Phys 93:025010 (R = 8.314462618 J/(mol·K)).
.. [3] Directive 2008/50/EC of the European Parliament and of the Council on ambient air quality and cleaner air
   for Europe: gaseous pollutants are reported as volumes standardised at 293 K and 101.3 kPa (checked in the
   national transposition of the ozone rules, 2026-12-02); particulate matter at ambient conditions (from
   memory).
.. [4] World Health Organization (2021). WHO global air quality guidelines. Geneva: WHO (ppb converted to
   µg/m³ at 25 °C and 1 atm).
"""

from __future__ import annotations

import re
from typing import Literal

import numpy as np
import pandas as pd

from .._choices import check_choice
from ..errors import DataError, SpecificationError

__all__ = [
    "GAS_CONSTANT",
    "MOLECULAR_WEIGHTS",
    "Pollutant",
    "Unit",
    "conversion_factor",
    "convert_units",
    "molar_volume",
    "parse_unit",
    "single_unit",
]

Pollutant = Literal["o3", "no2", "so2", "co"]
Unit = Literal["ppb", "ppm", "ugm3", "mgm3"]

#: Molar gas constant, J/(mol·K), CODATA 2018 (exact since the 2019 SI redefinition).
GAS_CONSTANT = 8.314462618

#: Molecular weights in g/mol, CRC Handbook of Chemistry and Physics [1].
MOLECULAR_WEIGHTS: dict[str, float] = {"o3": 48.00, "no2": 46.01, "so2": 64.07, "co": 28.01}

_STANDARD_ATMOSPHERE_KPA = 101.325
_MIXING = {"ppb": 1.0, "ppm": 1000.0}  # in ppb
_MASS = {"ugm3": 1.0, "mgm3": 1000.0}  # in µg/m³
_ALIASES = {
    "ppb": "ppb",
    "ppbv": "ppb",
    "nmol/mol": "ppb",
    "ppm": "ppm",
    "ppmv": "ppm",
    "µmol/mol": "ppm",
    "umol/mol": "ppm",
    "ugm3": "ugm3",
    "ug/m3": "ugm3",
    "µg/m3": "ugm3",
    "µg/m³": "ugm3",
    "ug/m³": "ugm3",
    "μg/m3": "ugm3",  # Greek mu rather than the micro sign
    "μg/m³": "ugm3",
    "mgm3": "mgm3",
    "mg/m3": "mgm3",
    "mg/m³": "mgm3",
}


#: Reference temperatures accepted for a conversion, °C: the usual reference conditions (0, 20, 25 °C) and any
#: ambient temperature lie inside; 293.15 (20 °C in kelvins) or 77 (25 °C in °F) do not (common practice, no
#: source).
REFERENCE_TEMPERATURE_RANGE_C = (-60.0, 60.0)


def _check_reference_temperature(temperature_c: float) -> None:
    """Refuse a conversion temperature that is not a plausible °C value, naming the likely unit."""
    t = float(temperature_c)
    lo, hi = REFERENCE_TEMPERATURE_RANGE_C
    if not np.isfinite(t) or lo <= t <= hi:
        return
    if 200 <= t <= 350:
        likely = f"it looks like kelvins ({t:g} K = {t - 273.15:g} °C); give {t - 273.15:g}"
    elif hi < t <= 140:
        likely = f"it looks like °F ({t:g} °F = {(t - 32) * 5 / 9:g} °C); give {(t - 32) * 5 / 9:g}"
    else:
        likely = "give the temperature in °C"
    raise SpecificationError(
        f"the conversion temperature {t:g} is outside {lo:g}…{hi:g} °C: {likely} (the EU reference is 20 °C, "
        "the WHO and US reference 25 °C)."
    )


def molar_volume(temperature_c: float = 25.0, pressure_kpa: float = _STANDARD_ATMOSPHERE_KPA) -> float:
    """Molar volume of an ideal gas in L/mol, ``Vm = R · T / P``.

    Parameters
    ----------
    temperature_c : float, default 25.0
        Temperature in °C (use 20.0 for the EU reference conditions).
    pressure_kpa : float, default 101.325
        Pressure in kPa (1 atm).

    Examples
    --------
    >>> round(molar_volume(25.0), 3)
    24.465
    >>> round(molar_volume(20.0), 3)
    24.055
    """
    _check_reference_temperature(temperature_c)
    kelvin = float(temperature_c) + 273.15
    if not np.isfinite(kelvin) or kelvin <= 0 or not np.isfinite(pressure_kpa) or pressure_kpa <= 0:
        raise SpecificationError(
            f"temperature_c={temperature_c!r} and pressure_kpa={pressure_kpa!r} must give a positive "
            "absolute temperature and pressure."
        )
    return GAS_CONSTANT * kelvin / (pressure_kpa * 1000.0) * 1000.0


def parse_unit(text: str) -> Unit:
    """Return the canonical unit code (``ppb``, ``ppm``, ``ugm3``, ``mgm3``) for a unit as written in data.

    Accepts e.g. ``"ppb"``, ``"ug/m3"``, ``"µg/m³"``, ``"mg/m3"`` (case and spaces ignored).
    """
    key = re.sub(r"\s+", "", str(text)).lower()
    if key not in _ALIASES:
        raise SpecificationError(f"unit {text!r} is not recognised; use one of ppb, ppm, ugm3 (µg/m³) or mgm3 (mg/m³).")
    return _ALIASES[key]  # type: ignore[return-value]


def conversion_factor(
    pollutant: Pollutant,
    unit_in: Unit | str,
    unit_out: Unit | str,
    *,
    temperature_c: float = 25.0,
    pressure_kpa: float = _STANDARD_ATMOSPHERE_KPA,
    molar_volume_l: float | None = None,
) -> float:
    """Multiplier turning values in ``unit_in`` into ``unit_out`` for ``pollutant``.

    Parameters
    ----------
    pollutant : {"o3", "no2", "so2", "co"}
    unit_in, unit_out : {"ppb", "ppm", "ugm3", "mgm3"} or a spelling accepted by :func:`parse_unit`
    temperature_c, pressure_kpa : float
        Reference conditions of the mass concentration (25 °C and 1 atm by default).
    molar_volume_l : float, optional
        Override the ideal-gas molar volume, e.g. 24.45 to reproduce tables that use that rounded value.

    Examples
    --------
    >>> round(conversion_factor("no2", "ppb", "ugm3"), 4)
    1.8806
    >>> round(conversion_factor("no2", "ppb", "ugm3", molar_volume_l=24.45), 4)
    1.8818
    """
    check_choice("pollutant", pollutant, Pollutant)
    unit_in, unit_out = parse_unit(unit_in), parse_unit(unit_out)
    if molar_volume_l is None:
        vm = molar_volume(temperature_c, pressure_kpa)
    elif not np.isfinite(molar_volume_l) or molar_volume_l <= 0:
        raise SpecificationError(f"molar_volume_l={molar_volume_l!r} must be a positive number of L/mol.")
    else:
        vm = float(molar_volume_l)
    ppb_to_ugm3 = MOLECULAR_WEIGHTS[pollutant] / vm
    # Express both units relative to "ppb" (mixing) or "µg/m³" (mass), then bridge if the kinds differ.
    scale_in = _MIXING.get(unit_in, _MASS.get(unit_in))
    scale_out = _MIXING.get(unit_out, _MASS.get(unit_out))
    factor = scale_in / scale_out
    if (unit_in in _MIXING) and (unit_out in _MASS):
        factor *= ppb_to_ugm3
    elif (unit_in in _MASS) and (unit_out in _MIXING):
        factor /= ppb_to_ugm3
    return float(factor)


def convert_units(
    values: pd.Series | np.ndarray | float,
    pollutant: Pollutant,
    unit_in: Unit | str,
    unit_out: Unit | str,
    *,
    temperature_c: float = 25.0,
    pressure_kpa: float = _STANDARD_ATMOSPHERE_KPA,
    molar_volume_l: float | None = None,
) -> pd.Series | np.ndarray | float:
    """Convert concentrations between units; returns a new object of the same kind (input unchanged).

    See :func:`conversion_factor` for the parameters.

    Examples
    --------
    >>> round(convert_units(40.0, "no2", "ppb", "ugm3", temperature_c=20.0), 2)
    76.51
    """
    factor = conversion_factor(
        pollutant,
        unit_in,
        unit_out,
        temperature_c=temperature_c,
        pressure_kpa=pressure_kpa,
        molar_volume_l=molar_volume_l,
    )
    return values * factor


def single_unit(frame: pd.DataFrame, column: str) -> Unit:
    """Return the one unit used in ``frame[column]``; raise if the column mixes units.

    Raises
    ------
    DataError
        If the column is missing, empty, or holds more than one unit (the message lists each unit with its
        row count and first row), or a unit that is not recognised.
    """
    if column not in frame.columns:
        raise DataError(f"unit column {column!r} is not in the data; columns are {list(frame.columns)}.")
    units = frame[column].dropna().astype(str).str.strip()
    if units.empty:
        raise DataError(f"unit column {column!r} has no values; state the unit with unit_in instead.")
    try:
        codes = units.map(parse_unit)
    except SpecificationError as exc:
        raise DataError(f"unit column {column!r}: {exc}") from None
    distinct = codes.unique()
    if len(distinct) > 1:
        parts = [
            f"{code!r} ({int((codes == code).sum())} rows, first at row {codes.index[codes == code][0]})"
            for code in distinct
        ]
        raise DataError(
            f"unit column {column!r} mixes units: {', '.join(parts)}. Convert the rows to one unit first "
            "(convert_units) or split the data by unit."
        )
    return distinct[0]
