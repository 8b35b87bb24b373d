"""Unit conversion checked against the ideal-gas law computed here, independently of the module.

Sources: ideal gas law c = x · M · P / (R · T); R = 8.314 J/(mol·K) (CODATA 2018: 8.314462618); molecular
weights from the CRC Handbook of Chemistry and Physics (O3 48.00, NO2 46.01, SO2 64.07, CO 28.01 g/mol);
the conventional molar volume 24.45 L/mol at 25 °C and 1 atm, and the WHO 2021 guidelines' conversion at
25 °C and 1 atm (both checked against the published texts; see the project's references).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from airhealth.errors import DataError, SpecificationError
from airhealth.prep.units import conversion_factor, convert_units, molar_volume, parse_unit, single_unit

CRC_WEIGHTS = {"o3": 48.00, "no2": 46.01, "so2": 64.07, "co": 28.01}  # g/mol, CRC Handbook
R_ROUNDED = 8.314  # J/(mol K)
ATM = 101325.0  # Pa


def ideal_gas_ugm3_per_ppb(weight: float, celsius: float, r: float = R_ROUNDED) -> float:
    # 1 ppb = 1e-9 mol/mol; moles per m³ of air = P / (R T); mass = moles · M g → µg (× 1e6)
    moles_air_per_m3 = ATM / (r * (celsius + 273.15))
    return 1e-9 * moles_air_per_m3 * weight * 1e6


@pytest.mark.parametrize("pollutant", ["o3", "no2", "so2", "co"])
@pytest.mark.parametrize("celsius", [25.0, 20.0])
def test_factor_matches_ideal_gas_law(pollutant, celsius):
    expected = ideal_gas_ugm3_per_ppb(CRC_WEIGHTS[pollutant], celsius)
    got = conversion_factor(pollutant, "ppb", "ugm3", temperature_c=celsius)
    # R = 8.314 vs the CODATA 8.314462618 differ by 5.6e-5 relative; allow 1e-4.
    assert got == pytest.approx(expected, rel=1e-4)
    exact = ideal_gas_ugm3_per_ppb(CRC_WEIGHTS[pollutant], celsius, r=8.314462618)
    assert got == pytest.approx(exact, rel=1e-12)  # same formula and constant: floating-point agreement
    # ppm -> mg/m³ is the same number; the inverse is its reciprocal
    assert conversion_factor(pollutant, "ppm", "mgm3", temperature_c=celsius) == pytest.approx(got, rel=1e-12)
    back = conversion_factor(pollutant, "ugm3", "ppb", temperature_c=celsius)
    assert back * got == pytest.approx(1.0, rel=1e-12)


@pytest.mark.parametrize(
    ("pollutant", "table_value"),
    # M / 24.45 rounded to 2 decimals, as in common conversion tables (from memory; computed here as well)
    [("o3", 1.96), ("no2", 1.88), ("so2", 2.62), ("co", 1.15)],
)
def test_factor_with_conventional_molar_volume(pollutant, table_value):
    conventional = CRC_WEIGHTS[pollutant] / 24.45
    assert round(conventional, 2) == table_value
    got = conversion_factor(pollutant, "ppb", "ugm3", molar_volume_l=24.45)
    assert got == pytest.approx(conventional, rel=1e-12)
    # the ideal-gas default (24.465 L) differs from the 24.45 convention by 0.06 %: allow 1e-3
    assert conversion_factor(pollutant, "ppb", "ugm3") == pytest.approx(conventional, rel=1e-3)


def test_molar_volume_values():
    # Vm = R·T/P with R = 8.314462618 J/(mol·K) (CODATA 2018, exact since the 2019 SI), T = 298.15 K and
    # P = 101.325 kPa: 24.4654 L/mol. Computed here; 1e-9 allows only floating-point rounding.
    r_codata = 8.314462618
    assert molar_volume(25.0) == pytest.approx(r_codata * 298.15 / 101.325, rel=1e-9)
    assert molar_volume(25.0) == pytest.approx(24.4654, abs=5e-5)  # the same, written out to 4 decimals
    # The conventional 24.45 L/mol (the ideal-gas value at 298 K, 24.453, as conversion tables use it) is reached
    # through the molar_volume_l option, which must give exactly M / 24.45 (relative 1e-12: rounding only).
    assert conversion_factor("no2", "ppb", "ugm3", molar_volume_l=24.45) == pytest.approx(
        CRC_WEIGHTS["no2"] / 24.45, rel=1e-12
    )
    assert conversion_factor("no2", "ppb", "ugm3", molar_volume_l=24.45) == pytest.approx(
        conversion_factor("no2", "ppb", "ugm3") * molar_volume(25.0) / 24.45, rel=1e-12
    )
    # 22.414 L at 0 °C (standard textbook value)
    assert molar_volume(0.0) == pytest.approx(22.414, rel=1e-4)
    assert molar_volume(20.0) / molar_volume(25.0) == pytest.approx(293.15 / 298.15, rel=1e-12)


def test_scale_only_conversions():
    assert conversion_factor("co", "ppm", "ppb") == 1000.0
    assert conversion_factor("co", "mgm3", "ugm3") == 1000.0
    # 1 ppm CO = 1.145 mg/m³ at 25 °C = 1145 µg/m³
    assert conversion_factor("co", "ppm", "ugm3") == pytest.approx(1000 * 28.01 / molar_volume(25.0), rel=1e-12)


def test_convert_series_returns_new_object():
    values = pd.Series([10.0, np.nan, 40.0], name="no2")
    out = convert_units(values, "no2", "ppb", "µg/m³")
    assert values.tolist()[0] == 10.0 and np.isnan(values.iloc[1])  # input unchanged
    assert out.iloc[2] == pytest.approx(40 * 46.01 / molar_volume(25.0), rel=1e-12)
    assert np.isnan(out.iloc[1])


def test_unit_spellings():
    assert parse_unit("µg/m³") == "ugm3"
    assert parse_unit(" UG/M3 ") == "ugm3"
    assert parse_unit("ppbv") == "ppb"
    with pytest.raises(SpecificationError, match="'furlongs' is not recognised"):
        parse_unit("furlongs")
    with pytest.raises(SpecificationError, match="pollutant='pm25'"):
        conversion_factor("pm25", "ppb", "ugm3")


def test_mixed_units_in_one_column_is_an_error():
    data = pd.DataFrame({"value": [1.0, 2.0, 3.0, 4.0], "unit": ["ppb", "ppb", "µg/m³", "ppb"]})
    with pytest.raises(DataError, match=r"mixes units: 'ppb' \(3 rows, first at row 0\), 'ugm3' \(1 rows"):
        single_unit(data, "unit")
    assert single_unit(data.iloc[[0, 1, 3]], "unit") == "ppb"
    # two spellings of one unit are one unit
    assert single_unit(pd.DataFrame({"unit": ["ug/m3", "µg/m³"]}), "unit") == "ugm3"


def test_bad_conditions_are_refused():
    with pytest.raises(SpecificationError):
        molar_volume(-300.0)
    with pytest.raises(SpecificationError):
        conversion_factor("o3", "ppb", "ugm3", molar_volume_l=0.0)
