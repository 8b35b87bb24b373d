"""Data that cannot support a model get errors naming the numbers, never a "converged" result.

Measured before these guards: an all-zero outcome was reported as a converged fit (RR 1.0000, dispersion
7e-26; a traceback with family="poisson"), and constant counts gave QAIC 6e33 with exit code 0.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.cli.main import main
from airhealth.errors import DataError
from airhealth.model.design import build_design, model_frame
from airhealth.model.spec import ModelSpec
from airhealth.prep.degenerate import MIN_DAYS_PER_PARAMETER
from airhealth.studies.compare import compare

BASE = {"outcome": "deaths_all", "exposure": "pm25", "lag": "0-1", "temperature": "temperature"}
COMPARE = {k: v for k, v in BASE.items() if k != "lag"}


def fit(data, **options):
    return airhealth.fit(data, **{**BASE, **options})


@pytest.mark.parametrize("family", ["quasipoisson", "poisson", "negbin"])
def test_outcome_without_events_is_an_error(three_years, family):
    data = three_years.assign(deaths_all=0)
    before = data.copy()
    with pytest.raises(DataError, match=r"outcome column 'deaths_all' has no events: it is 0 on all 1096 days with a "
                       r"count \(2010-01-01 to 2012-12-31\).*check the column"):  # fmt: skip
        fit(data, family=family)
    pd.testing.assert_frame_equal(data, before)


def test_constant_counts_are_an_error(three_years):
    with pytest.raises(DataError, match=r"'deaths_all' has the same count, 7, on all 1096 days with a count "
                       r"\(2010-01-01 to 2012-12-31\); it carries no day-to-day variation"):  # fmt: skip
        fit(three_years.assign(deaths_all=7))


def test_constant_counts_exit_with_code_2_on_the_command_line(three_years, tmp_path, capsys):
    path = tmp_path / "constant.csv"
    three_years.assign(deaths_all=7).to_csv(path, index=False)
    code = main(["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25", "--temperature", "temperature"])
    assert code == 2
    assert "'deaths_all' has the same count, 7" in capsys.readouterr().err


def test_empty_frame_is_an_error(three_years):
    with pytest.raises(DataError, match=r"data has no rows \(columns: date, deaths_all, .*only a header line"):
        fit(three_years.iloc[:0])


def test_header_only_file_is_a_one_line_error_on_the_command_line(three_years, tmp_path, capsys):
    path = tmp_path / "header.csv"
    three_years.iloc[:0].to_csv(path, index=False)
    code = main(["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25"])
    assert code == 2
    err = capsys.readouterr().err
    assert "no rows" in err and "Traceback" not in err


def test_exposure_that_never_varies_is_an_error(three_years):
    data = three_years.assign(pm25=12.0)
    data.loc[5, "pm25"] = np.nan
    with pytest.raises(DataError, match=r"exposure column 'pm25' never varies: it is 12 on all 1095 days with a value "
                       r"\(2010-01-01 to 2012-12-31\)"):  # fmt: skip
        fit(data)


def test_exposure_constant_on_the_usable_days_is_named_with_those_days(three_years):
    # the exposure varies only on days without a count: over the days a model can use it is constant
    data = three_years.copy()
    data["pm25"] = 12.0
    data.loc[:99, "pm25"] = np.linspace(5, 30, 100)
    data.loc[:99, "deaths_all"] = np.nan
    with pytest.raises(DataError, match=r"'pm25' never varies: it is 12 on all \d+ usable days with a value"):
        fit(data)


def test_fewer_events_than_parameters_is_an_error(three_years):
    rare = (np.arange(len(three_years)) % 60 == 0).astype(int)  # 19 events in three years
    with pytest.raises(DataError, match=r"'deaths_all' has only 18 events on the 1063 usable days \(2010-01-04 to "
                       r"2012-12-31\), fewer than the 41 model parameters.*Pool outcomes or years"):  # fmt: skip
        fit(three_years.assign(deaths_all=rare))


def test_too_many_parameters_for_the_days_names_the_numbers(three_years):
    short = three_years.iloc[:200]
    with pytest.raises(DataError) as err:
        fit(short)
    message = str(err.value)
    # 1 + 4 (time: round(7 × 200/365.25)) + 6 + 6 (temperature) + 6 (day of week) + 1 (exposure) = 24
    assert "has 24 parameters for 195 usable days (8.1 days per parameter, 2010-01-04 to 2010-07-19)" in message
    assert f"at least {MIN_DAYS_PER_PARAMETER} days per parameter (240 days)" in message
    assert "fewer df (trend_df_per_year, temperature_df, temperature_lag_df)" in message
    # the remedy works: smaller temperature splines give 15 parameters, 13 days each
    fit(short, temperature_df=2, temperature_lag_df=2)


def test_no_usable_days_keeps_the_design_builders_reasons(three_years):
    data = three_years.copy()
    data.loc[data.index % 3 != 0, "pm25"] = np.nan  # every third day measured
    with pytest.raises(DataError, match=r"too few usable days \(0\).*MovingAverage\(first, last, min_count=1\)"):
        fit(data, lag="0-2")


def test_usable_day_checks_run_in_the_design_builder(three_years):
    # the same checks for every front end that builds a design (fit, compare, sweeps)
    spec = ModelSpec.from_options(**BASE)
    frame = model_frame(three_years.iloc[:200], spec)
    with pytest.raises(DataError, match=r"24 parameters for 195 usable days"):
        build_design(frame, spec)


def summer_only(sample, column="o3"):
    data = sample.copy()
    data.loc[~data["date"].dt.month.between(4, 9), column] = np.nan
    return data


def test_exposure_measured_in_one_season_names_the_months_and_the_season_analysis(sample):
    data = summer_only(sample)
    with pytest.raises(DataError) as err:
        fit(data, exposure="o3")
    message = str(err.value)
    assert "exposure column 'o3' is measured only in Apr–Sep of each year (2010–2023)" in message
    assert "no values in Oct–Mar although 'deaths_all' is recorded then" in message
    assert "data[data['date'].dt.month.between(4, 9)]" in message and "trend_df_per_year=3.5" in message
    assert "collinear" not in message


def test_the_suggested_season_analysis_runs(sample):
    data = summer_only(sample)
    season = data[data["date"].dt.month.between(4, 9)]
    with pytest.warns(airhealth.errors.DataWarning, match=r"calendar day\(s\) absent"):  # the winters are gaps
        result = fit(season, exposure="o3", trend_df_per_year=3.5)
    assert result.n_days > 2000 and np.isfinite(result.effect().rr)


def test_winter_season_across_the_new_year_is_named_as_one_run(sample):
    data = sample.copy()
    data.loc[data["date"].dt.month.between(4, 9), "pm25"] = np.nan
    with pytest.raises(DataError, match=r"measured only in Oct–Mar of each year.*isin\(\[1, 2, 3, 10, 11, 12\]\)"):
        fit(data)


def test_a_single_long_gap_is_not_called_a_season(sample):
    # one monitor outage of six months is a gap (left to the design's checks), not a seasonal monitor
    data = sample[sample["date"] < "2014-01-01"].copy()
    data.loc[data["date"].between("2011-04-01", "2011-09-30"), "pm25"] = np.nan
    fit(data)


def test_compare_gives_the_same_degenerate_data_errors(three_years, sample):
    with pytest.raises(DataError, match=r"'deaths_all' has no events"):
        compare(three_years.assign(deaths_all=0), lags=["0", "0-1"], **COMPARE)
    with pytest.raises(DataError, match=r"'pm25' never varies"):
        compare(three_years.assign(pm25=3.0), lags=["0", "0-1"], **COMPARE)
    with pytest.raises(DataError, match=r"'o3' is measured only in Apr–Sep"):
        compare(summer_only(sample), lags=["0", "0-1"], **{**COMPARE, "exposure": "o3"})
