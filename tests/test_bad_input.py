"""Bad input gives a clear error naming the problem; legal-but-suspicious input gives a warning.

Each case asserts the error class and that the message names the column / date / row / option at fault
and, where the issue asks for it, what to do. Calendar gaps are legal: they are filled with missing rows
(with a DataWarning), never dropped or shifted, so lags keep referring to calendar days.
"""

from __future__ import annotations

import re
import warnings

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.errors import AirhealthWarning, DataError, DataWarning, FitError, SpecificationError
from airhealth.model.design import build_design, model_frame
from airhealth.model.spec import ModelSpec

BASE = {"outcome": "deaths_all", "exposure": "pm25", "lag": "0-1", "temperature": "temperature"}


def fit(data, **options):
    return airhealth.fit(data, **{**BASE, **options})


# --- dates ----------------------------------------------------------------------------------------


def test_duplicated_dates_are_named(three_years):
    data = pd.concat([three_years, three_years.iloc[[5, 40]]], ignore_index=True)
    with pytest.raises(DataError, match=r"duplicated dates: 2010-01-06, 2010-02-10.*one row per day"):
        fit(data)


def test_unparseable_dates_name_the_row_and_value(three_years):
    data = three_years.assign(date=three_years["date"].dt.strftime("%Y-%m-%d"))
    data.loc[7, "date"] = "2010-13-45"
    data.loc[9, "date"] = "yesterday"
    with pytest.raises(DataError, match=r"not dates: row 7: '2010-13-45', row 9: 'yesterday'.*ISO dates"):
        fit(data)


def test_missing_date_is_named(three_years):
    data = three_years.copy()
    data.loc[5, "date"] = pd.NaT
    with pytest.raises(DataError, match=r"missing dates at row\(s\) 5"):
        fit(data)


def test_day_first_dates_are_not_silently_reordered(three_years):
    # Element-wise parsing would read 02/01/2010 as 1 February and 13/01/2010 as 13 January.
    data = three_years.assign(date=three_years["date"].dt.strftime("%d/%m/%Y"))
    with pytest.raises(DataError, match=r"such as '13/01/2010'.*read day first: pass date_format='%d/%m/%Y'"):
        fit(data)


def test_day_first_dates_are_refused_even_when_the_first_value_settles_the_order(three_years):
    # One rule for every file: a day-first file starting on 13 January and one starting on 2 January get the
    # same answer (the format to give), never a silent guess from the first value.
    part = three_years.iloc[12:400].reset_index(drop=True)  # starts on 13 January
    as_text = part.assign(date=part["date"].dt.strftime("%d/%m/%Y"))
    with pytest.raises(DataError, match=r"such as '13/01/2010'.*--date-format '%d/%m/%Y'"):
        fit(as_text, trend_df_per_year=2)


def test_weekly_data_are_not_daily(three_years):
    weekly = three_years.iloc[::7].reset_index(drop=True)
    with pytest.raises(DataError, match=r"not a daily series: the typical step between dates is 7 days"):
        fit(weekly, trend_df_per_year=1)


@pytest.mark.parametrize("freq", ["h", "6h"])
def test_sub_daily_timestamps_are_named(three_years, freq):
    data = three_years.assign(date=pd.date_range("2010-01-01", periods=len(three_years), freq=freq))
    with pytest.raises(DataError, match=r"not daily: it has times of day, e\.g\. 2010-01-01 \d\d:00:00.*hourly"):
        fit(data)


def test_one_timestamp_off_midnight_is_named(three_years):
    data = three_years.copy()
    data.loc[10, "date"] += pd.Timedelta(hours=6)
    with pytest.raises(DataError, match=r"times of day, e\.g\. 2010-01-11 06:00:00"):
        fit(data)


# --- counts ---------------------------------------------------------------------------------------


def test_negative_counts_are_named_with_their_date(three_years):
    data = three_years.copy()
    data.loc[3, "deaths_all"] = -2
    with pytest.raises(DataError, match=r"'deaths_all' has negative counts at 2010-01-04 \(-2\).*>= 0"):
        fit(data)


def test_non_integer_counts_are_named_with_their_date(three_years):
    data = three_years.astype({"deaths_all": float})
    data.loc[3, "deaths_all"] = 2.5
    with pytest.raises(DataError, match=r"'deaths_all' has non-integer counts at 2010-01-04 \(2\.5\)"):
        fit(data)


def test_text_counts_are_rejected(three_years):
    # numbers stored as text are read as numbers (as read_csv would); other text is named with its date
    data = three_years.astype({"deaths_all": str})
    data.loc[3, "deaths_all"] = "twelve"
    with pytest.raises(DataError, match=r"'deaths_all' must be numeric but holds text .*'twelve', on 2010-01-04"):
        fit(data)


@pytest.mark.parametrize("column", ["deaths_all", "pm25", "temperature"])
def test_infinite_values_are_named(three_years, column):
    data = three_years.astype({column: float})
    data.loc[5, column] = np.inf
    with pytest.raises(DataError, match=rf"'{column}'.* infinite values (at|on) 2010-01-06"):
        fit(data)


# --- columns --------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("option", "value"),
    [
        ("exposure", "pm2.5"),
        ("outcome", "deaths"),
        ("temperature", "temp"),
        ("humidity", "rh"),
        ("date", "day"),
        ("offset", "log_pop"),
        ("confounders", ["flu"]),
    ],
)
def test_a_column_that_does_not_exist_is_named(three_years, option, value):
    missing = value[0] if isinstance(value, list) else value
    with pytest.raises(DataError, match=rf"column '{missing}' does not exist in data; available columns: date,"):
        fit(three_years, **{option: value})


@pytest.mark.parametrize(("column", "role"), [("pm25", "exposure"), ("deaths_all", "outcome")])
def test_an_entirely_missing_exposure_or_outcome_is_named(three_years, column, role):
    data = three_years.assign(**{column: np.nan})
    with pytest.raises(DataError, match=rf"{role} column '{column}' is entirely missing"):
        fit(data)


def test_an_entirely_missing_temperature_is_named(three_years):
    with pytest.raises(DataError, match=r"column 'temperature' is entirely missing"):
        fit(three_years.assign(temperature=np.nan))


def test_exposure_missing_after_alignment_is_named():
    # the pollution table covers other dates than the counts: after alignment pm25 is all missing
    counts = pd.DataFrame({"date": pd.date_range("2020-01-01", periods=400), "deaths": 30})
    pollution = pd.DataFrame({"date": pd.date_range("2022-01-01", periods=30), "pm25": 12.0})
    data = airhealth.align_daily(counts, pollution).iloc[:400]
    with pytest.raises(DataError, match=r"exposure column 'pm25' is entirely missing"):
        airhealth.fit(data, outcome="deaths", exposure="pm25", lag="0")


def test_outcome_and_exposure_must_differ(three_years):
    with pytest.raises(SpecificationError, match=r"outcome and exposure are the same column, 'deaths_all'"):
        fit(three_years, exposure="deaths_all")


def test_data_must_be_a_data_frame(three_years):
    with pytest.raises(DataError, match=r"data must be a pandas DataFrame, got dict"):
        fit(three_years.to_dict())


# --- too few days for the degrees of freedom ------------------------------------------------------


def test_too_few_days_for_the_model_names_the_counts(three_years):
    with pytest.raises(DataError, match=r"too few usable days \(17\) for a model with 21 parameters.*longer series"):
        fit(three_years.iloc[:20])


def test_too_few_days_for_the_time_trend(three_years):
    with pytest.raises(DataError, match=r"too few days \(100\) for a time trend with 110 df; lower trend_df_per_year"):
        fit(three_years.iloc[:100], trend_df_per_year=400, temperature=None)


def test_too_few_distinct_values_for_a_spline(three_years):
    data = three_years.assign(humidity=np.tile([60.0, 70.0, 80.0], len(three_years))[: len(three_years)])
    with pytest.raises(DataError, match=r"'humidity' has too few distinct values for a spline with 3 df"):
        fit(data, humidity="humidity")


def test_lag_longer_than_the_series(three_years):
    with pytest.raises(SpecificationError, match=r"lag 0-80 reaches back 80 days but the series has only 70 days"):
        fit(three_years.iloc[:70], lag="0-80")


def test_exposure_collinear_with_a_confounder_names_both(three_years):
    data = three_years.assign(pm25_twice=2 * three_years["pm25"])
    pattern = r"rank-deficient \(collinear columns\): '.+' is a linear combination of '.+'"
    with pytest.raises(FitError, match=pattern) as err:
        fit(data, lag="0", confounders=["pm25_twice"])
    # Which of two exactly collinear columns the pivoted QR names first depends on rounding in the LAPACK
    # build (numpy/scipy wheels differ), so the message is checked for the pair, in either order, and for
    # naming no other column.
    assert set(re.findall(r"'([^']+)'", str(err.value))) == {"pm25[0]", "pm25_twice"}
    assert "Drop one of the columns named in each group and refit." in str(err.value)


# --- options --------------------------------------------------------------------------------------


def test_unknown_option_is_named_with_the_valid_ones(three_years):
    with pytest.raises(SpecificationError, match=r"unknown model option 'humidty'; valid options are: .*humidity"):
        fit(three_years, humidty="humidity")


@pytest.mark.parametrize("family", ["quasi-poisson", "Poisson", "gaussian", ""])
def test_bad_family_is_named_with_the_choices(three_years, family):
    with pytest.raises(
        SpecificationError, match=rf"family='{family}' is not a valid choice; use one of 'quasipoisson'"
    ):
        fit(three_years, family=family)


def test_bad_seasonality_is_named(three_years):
    with pytest.raises(SpecificationError, match=r"seasonality='loess' is not a valid choice"):
        fit(three_years, seasonality="loess")


@pytest.mark.parametrize(
    ("lag", "message"),
    [
        ("0:1", r"lag '0:1' is not understood; use a day such as '0'"),
        ("abc", r"lag 'abc' is not understood"),
        ("", r"lag '' is not understood"),
        ("-1", r"lag '-1': lags are days before the outcome and cannot be negative"),
        ("3-1", r"lag '3-1': the last lag must not be before the first"),
        (1.5, r"a lag must be a string such as '0', '0-1'.*got 1\.5"),
        (-2, r"a lag must be a whole number of days >= 0, got -2"),
    ],
)
def test_bad_lag_strings_are_named(three_years, lag, message):
    with pytest.raises(SpecificationError, match=message):
        fit(three_years, lag=lag)


@pytest.mark.parametrize(
    ("option", "value", "message"),
    [
        ("trend_df_per_year", 0, r"trend_df_per_year must be > 0, got 0"),
        ("trend_df_per_year", "7", r"trend_df_per_year must be a number > 0, got '7'"),
        ("temperature_lags", 5, r"temperature_lags must be a pair \(first, last\) such as \(1, 3\), or None; got 5"),
        ("temperature_lags", (3, 1), r"term lags must be a day >= 0 or a pair \(first, last\), got \(3, 1\)"),
        ("temperature_df", "6", r"temperature_df must be a whole number >= 1, got '6'"),
        ("humidity_df", 0, r"humidity_df must be a whole number >= 1, got 0"),
        ("tol", 0.1, r"tol must be between 0 and 1e-3"),
        ("confounders", [3.5], r"confounder 3\.5 is not a column name or a term"),
    ],
)
def test_bad_option_values_are_named(three_years, option, value, message):
    with pytest.raises(SpecificationError, match=message):
        fit(three_years, **{option: value})


def test_unknown_holiday_country_is_named(three_years):
    with pytest.raises(DataError, match=r"no public-holiday calendar for country 'XX'.*ISO 3166"):
        fit(three_years, holidays="XX")


def test_bad_effect_scale_is_named(three_years):
    result = fit(three_years)
    with pytest.raises(SpecificationError, match=r"scale='sd' is not a valid choice; use one of 'unit', 'iqr'"):
        result.effect(scale="sd")


# --- calendar gaps: warned, filled, not shifted ---------------------------------------------------


@pytest.fixture
def with_gap(three_years):
    gap = pd.to_datetime(["2010-04-11", "2010-04-12", "2010-04-13"])
    return three_years[~three_years["date"].isin(gap)].reset_index(drop=True)


def test_gap_is_warned_about_and_filled_with_missing_rows(with_gap):
    spec = ModelSpec.from_options(**BASE)
    with pytest.warns(DataWarning, match=r"3 calendar day\(s\) absent .* 2010-04-11 to 2010-04-13"):
        frame = model_frame(with_gap, spec)
    assert len(frame) == len(with_gap) + 3
    assert pd.DatetimeIndex(frame["date"]).equals(pd.date_range("2010-01-01", "2012-12-31"))
    filled = frame.set_index("date").loc["2010-04-11":"2010-04-13"]
    assert filled[["deaths_all", "pm25", "temperature"]].isna().all().all()
    # the days around the gap keep their own values (nothing shifted)
    around = frame.set_index("date").loc[["2010-04-10", "2010-04-14"], "pm25"]
    original = with_gap.set_index("date").loc[["2010-04-10", "2010-04-14"], "pm25"]
    pd.testing.assert_series_equal(around, original)


@pytest.mark.parametrize(
    ("lag", "reason"), [("1", "exposure missing in lag window"), ("0-1", "exposure missing in lag window")]
)
def test_lags_refer_to_calendar_days_across_a_gap(with_gap, lag, reason):
    spec = ModelSpec.from_options(**{**BASE, "lag": lag})
    with pytest.warns(DataWarning):
        frame = model_frame(with_gap, spec)
    design = build_design(frame, spec)
    dropped = design.dropped.set_index("date")["reason"]
    # the gap days have no outcome; the day after the gap has no lag-1 exposure (not the value of 10 April)
    assert (dropped.loc["2010-04-11":"2010-04-13"] == "outcome missing").all()
    assert dropped.loc[pd.Timestamp("2010-04-14")] == reason
    after = frame.index[frame["date"] == "2010-04-14"][0]
    assert np.isnan(design.exposure_values[after, 0])
    # on 15 April the lag-1 value is that of 14 April
    day = frame.index[frame["date"] == "2010-04-15"][0]
    pm = frame.set_index("date")["pm25"]
    expected = pm["2010-04-14"] if lag == "1" else (pm["2010-04-14"] + pm["2010-04-15"]) / 2
    assert design.exposure_values[day, 0] == pytest.approx(expected, rel=1e-15)


def test_fit_with_a_gap_equals_the_fit_on_the_filled_calendar(with_gap, three_years):
    filled = three_years.copy()
    filled.loc[filled["date"].between("2010-04-11", "2010-04-13"), ["deaths_all", "pm25", "temperature"]] = np.nan
    with pytest.warns(DataWarning):
        a = fit(with_gap)
    with warnings.catch_warnings():
        # airhealth's warnings only: a library's deprecation notice is not a failure here
        warnings.simplefilter("error", AirhealthWarning)
        b = fit(filled)
    assert a.exposure_coef == pytest.approx(b.exposure_coef, rel=1e-12)
    assert a.n_days == b.n_days


def test_a_single_confounder_name_is_one_confounder_not_its_letters(three_years):
    data = three_years.assign(flu=(np.arange(len(three_years)) % 50 == 0).astype(float))
    one = fit(data, confounders="flu")
    listed = fit(data, confounders=["flu"])
    assert one.exposure_coef == listed.exposure_coef
    assert "flu" in one.coef.index
