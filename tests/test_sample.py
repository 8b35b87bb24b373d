"""Tests of the invented Norhaven sample tables and the city simulator that produces them.

Unless noted otherwise, the thresholds below are plausibility bounds chosen for this invented scenario
(common practice for checking simulated data, no source); each is several standard errors away from the
value the documented data-generating process implies, so the checks are stable but still fail when a
feature is missing or has the wrong sign.
"""

from __future__ import annotations

import importlib.util
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from airhealth.errors import DataError, SpecificationError
from airhealth.sample import SAMPLE_FILES, SAMPLE_SEED, SAMPLE_TRUE_EFFECTS, load_sample_tables, sample_path
from airhealth.simulate import OUTCOMES, POLLUTANTS, TRUE_EFFECTS, simulate_city

REPO = Path(__file__).resolve().parent.parent
GENERATOR = REPO / "sample_data" / "generate_sample.py"
N_DAYS = 5113  # 2010-01-01 .. 2023-12-31 inclusive
OUTAGE_DAYS = 9
MISSING_PER_POLLUTANT = round(0.015 * (N_DAYS - OUTAGE_DAYS))  # 77, as documented in the README


def _load_generator():
    spec = importlib.util.spec_from_file_location("generate_sample", GENERATOR)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def tables() -> dict[str, pd.DataFrame]:
    return load_sample_tables()


# --- reproducibility and packaging -------------------------------------------------------------------


def test_generator_script_reproduces_committed_csvs_exactly(tmp_path):
    result = subprocess.run(
        [sys.executable, str(GENERATOR), "--out", str(tmp_path)], capture_output=True, text=True, check=False
    )
    assert result.returncode == 0, result.stderr
    for file_name in SAMPLE_FILES.values():
        assert (tmp_path / file_name).read_bytes() == (REPO / "sample_data" / file_name).read_bytes(), file_name


def test_package_data_equals_sample_data_copies():
    for key, file_name in SAMPLE_FILES.items():
        assert sample_path(key).read_bytes() == (REPO / "sample_data" / file_name).read_bytes(), file_name
        assert sample_path(file_name) == sample_path(key)


def test_documented_constants_agree():
    generator = _load_generator()
    assert generator.TRUE_EFFECTS == TRUE_EFFECTS
    assert SAMPLE_TRUE_EFFECTS == TRUE_EFFECTS
    assert generator.SEED == SAMPLE_SEED == 20261202
    assert TRUE_EFFECTS[("deaths_all", "pm25")] == {"lag": "0-1", "rr_per_10": 1.010}
    assert TRUE_EFFECTS[("admissions_respiratory", "no2")] == {"lag": "0", "rr_per_10": 1.015}
    assert TRUE_EFFECTS[("admissions_respiratory", "o3")] == {"lag": "0-1", "rr_per_10": 1.008}
    assert TRUE_EFFECTS[("admissions_cardiovascular", "pm10")] == {"lag": "0-1", "rr_per_10": 1.006}


def test_simulate_city_is_deterministic_and_seed_dependent():
    first = simulate_city(7, "2012-01-01", "2013-12-31")
    second = simulate_city(7, "2012-01-01", "2013-12-31")
    other = simulate_city(8, "2012-01-01", "2013-12-31")
    for key in ("counts", "pollution", "weather"):
        pd.testing.assert_frame_equal(first[key], second[key])
    assert not first["counts"].equals(other["counts"])


def test_unknown_sample_name_raises_a_clear_error():
    with pytest.raises(DataError, match="'counts'"):
        sample_path("deaths")


# --- shapes, columns and ranges ------------------------------------------------------------------------


def test_columns_dtypes_and_calendar(tables):
    assert list(tables) == ["counts", "pollution", "weather"]
    assert list(tables["counts"].columns) == ["date", *OUTCOMES]
    assert list(tables["pollution"].columns) == ["date", *POLLUTANTS]
    assert list(tables["weather"].columns) == ["date", "temperature", "humidity"]
    calendar = pd.date_range("2010-01-01", "2023-12-31", freq="D")
    for key in ("counts", "weather"):
        frame = tables[key]
        assert pd.api.types.is_datetime64_any_dtype(frame["date"])
        assert (frame["date"].to_numpy() == calendar.to_numpy()).all(), key
        assert not frame.isna().any().any(), key
    for outcome in OUTCOMES:
        assert tables["counts"][outcome].dtype == np.int64
        assert (tables["counts"][outcome] >= 0).all()


def test_pollution_outage_rows_absent_and_missing_fraction(tables):
    pollution = tables["pollution"]
    assert len(pollution) == N_DAYS - OUTAGE_DAYS
    assert pollution["date"].is_monotonic_increasing and pollution["date"].is_unique
    absent = pd.date_range("2010-01-01", "2023-12-31", freq="D").difference(pollution["date"])
    assert len(absent) == OUTAGE_DAYS
    assert (absent[-1] - absent[0]).days == OUTAGE_DAYS - 1  # one consecutive block
    for pollutant in POLLUTANTS:
        assert pollution[pollutant].isna().sum() == MISSING_PER_POLLUTANT, pollutant


def test_value_ranges_and_levels(tables):
    counts, pollution, weather = tables["counts"], tables["pollution"], tables["weather"]
    # Documented means 35, 15 and 25 a day; the realised 14-year mean is within ~0.5 of each.
    assert counts["deaths_all"].mean() == pytest.approx(35.0, abs=1.5)
    assert counts["admissions_respiratory"].mean() == pytest.approx(15.0, abs=1.0)
    assert counts["admissions_cardiovascular"].mean() == pytest.approx(25.0, abs=1.0)
    values = pollution[list(POLLUTANTS)]
    assert (values.dropna() > 0).all().all()
    assert (values.stack().dropna() * 10).round(6).mod(1).eq(0).all()  # one decimal
    both = pollution[["pm25", "pm10"]].dropna()
    assert (both["pm25"] <= both["pm10"]).all()  # PM2.5 is a fraction of PM10
    assert 8 < pollution["pm25"].mean() < 20 and 15 < pollution["pm10"].mean() < 30
    assert weather["temperature"].between(-25, 40).all()
    assert weather["humidity"].between(0, 100).all()


# --- features of the data-generating process ----------------------------------------------------------


def test_counts_are_overdispersed(tables):
    # Dispersion phi is 1.3-1.5 by construction; residual variation around a 30-day centred mean also
    # contains short-term temperature and epidemic effects, so the ratio must exceed 1.1 (Poisson: ~1.0).
    counts = tables["counts"]
    for outcome in OUTCOMES:
        y = counts[outcome].astype(float)
        residual = (y - y.rolling(30, center=True).mean()).dropna()
        ratio = residual.var() / y.mean()
        assert 1.1 < ratio < 2.5, (outcome, ratio)


def test_weekday_pattern(tables):
    counts = tables["counts"]
    weekend = counts["date"].dt.day_of_week >= 5
    for outcome in ("admissions_respiratory", "admissions_cardiovascular"):
        ratio = counts.loc[weekend, outcome].mean() / counts.loc[~weekend, outcome].mean()
        assert ratio < 0.92, (outcome, ratio)  # realised: about 0.82
    ratio = counts.loc[weekend, "deaths_all"].mean() / counts.loc[~weekend, "deaths_all"].mean()
    assert 0.97 < ratio < 1.03, ratio


def test_temperature_mortality_relation_is_u_shaped(tables):
    temp01 = tables["weather"]["temperature"].rolling(2).mean()
    deaths = tables["counts"]["deaths_all"]
    mild = deaths[temp01.between(16, 21)].mean()
    assert deaths[temp01 < 0].mean() > 1.15 * mild  # cold: realised about +35 %
    assert deaths[temp01 > 23.5].mean() > 1.05 * mild  # heat: realised about +15 % (56 days)


def test_pollutant_correlations_and_season(tables):
    merged = tables["pollution"].merge(tables["weather"], on="date")
    corr = merged[[*POLLUTANTS, "temperature"]].corr()
    assert corr.loc["pm25", "pm10"] > 0.8
    assert corr.loc["no2", "pm10"] > 0.3
    assert corr.loc["no2", "o3"] < -0.3
    assert corr.loc["pm10", "temperature"] < -0.1  # PM higher in winter
    assert corr.loc["no2", "temperature"] < -0.1
    assert corr.loc["o3", "temperature"] > 0.3  # ozone higher in summer
    log_pm10 = np.log(merged.set_index("date")["pm10"].asfreq("D"))
    assert log_pm10.autocorr(1) > 0.5  # AR(1) on the log scale


def test_pollution_declines_over_time(tables):
    yearly = tables["pollution"].groupby(tables["pollution"]["date"].dt.year)[["pm25", "pm10", "no2"]].mean()
    early, late = yearly.loc[2010:2012].mean(), yearly.loc[2021:2023].mean()
    assert (late < 0.85 * early).all()  # built in: 2.5-3.5 % a year, about -30 % over 11 years


# --- simulate_city ---------------------------------------------------------------------------------------


def _log_ratio_slopes(outcome: str, effects: dict) -> tuple[np.ndarray, list[str]]:
    """Regress log(counts with effects / counts without) on the effects' lagged pollutant windows.

    With dispersion 1 and a huge baseline the counts equal their expectation up to ~0.1 % noise, and the
    weather, pollution and epidemics are drawn before the counts, so the log ratio is the pollutant term
    plus a constant (a property of the simulator's definition, no external source).
    """
    options = {
        "baseline": dict.fromkeys(OUTCOMES, 1e6),
        "dispersion": dict.fromkeys(OUTCOMES, 1.0),
        "missing_fraction": 0.0,
        "outage_days": 0,
        "include_truth": True,
    }
    with_effect = simulate_city(11, "2014-01-01", "2016-12-31", effects=effects, **options)
    without = simulate_city(11, "2014-01-01", "2016-12-31", effects={}, **options)
    truth = with_effect["pollution_true"]
    pd.testing.assert_frame_equal(truth, without["pollution_true"])
    y = np.log(with_effect["counts"][outcome] / without["counts"][outcome]).to_numpy()
    columns, names = [np.ones(len(y))], []
    for (target, pollutant), spec in effects.items():
        if target == outcome:
            first, _, last = str(spec["lag"]).partition("-")
            window = range(int(first), int(last or first) + 1)
            columns.append(np.mean([truth[pollutant].shift(lag).to_numpy() for lag in window], axis=0))
            names.append(pollutant)
    design = np.column_stack(columns)
    keep = ~np.isnan(design).any(axis=1)
    coef, *_ = np.linalg.lstsq(design[keep], y[keep], rcond=None)
    return coef[1:], names


@pytest.mark.parametrize("outcome", OUTCOMES)
def test_true_effects_are_injected_with_the_documented_lag_and_size(outcome):
    slopes, names = _log_ratio_slopes(outcome, TRUE_EFFECTS)
    for slope, pollutant in zip(slopes, names, strict=True):
        expected = np.log(TRUE_EFFECTS[(outcome, pollutant)]["rr_per_10"]) / 10
        # Slope standard error is ~1e-6 on a ~1e-3 slope (realised error < 0.1 %); 1 % relative tolerance.
        assert slope == pytest.approx(expected, rel=0.01), pollutant


def test_observed_pollution_equals_truth_where_present():
    tables = simulate_city(3, "2015-01-01", "2016-12-31", include_truth=True)
    merged = tables["pollution"].merge(tables["pollution_true"], on="date", suffixes=("", "_true"))
    assert len(merged) == len(tables["pollution"]) == 731 - 9
    for pollutant in POLLUTANTS:
        present = merged[pollutant].notna()
        assert (merged.loc[present, pollutant] == merged.loc[present, f"{pollutant}_true"]).all()
    assert not tables["pollution_true"].isna().any().any()


def test_options_for_complete_tables_and_city_name():
    tables = simulate_city(5, "2015-01-01", "2015-12-31", name="Eastmere", missing_fraction=0, outage_days=0)
    assert len(tables["pollution"]) == 365 and not tables["pollution"].isna().any().any()
    assert tables["counts"].attrs["city"] == "Eastmere"


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"effects": {("deaths_all", "pm25"): {"lag": "2-1", "rr_per_10": 1.01}}}, "first <= last"),
        ({"effects": {("deaths_all", "pm25"): {"lag": "zero", "rr_per_10": 1.01}}}, "is not a lag"),
        ({"effects": {("deaths_all", "pm25"): {"lag": "0", "rr_per_10": -1}}}, "positive"),
        ({"effects": {("deaths", "pm25"): {"lag": "0", "rr_per_10": 1.01}}}, "outcome"),
        ({"dispersion": {"deaths_all": 0.5}}, "dispersion"),
        ({"baseline": {"deaths_all": 0.0}}, "baseline"),
        ({"missing_fraction": 0.7}, "missing_fraction"),
        ({"end": "2015-01-20"}, "at least 60"),
    ],
)
def test_invalid_options_raise_specification_errors(kwargs, message):
    options = {"start": "2015-01-01", "end": "2015-12-31", **kwargs}
    with pytest.raises(SpecificationError, match=message):
        simulate_city(1, **options)
