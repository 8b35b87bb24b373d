"""Data preparation: lags, moving averages, alignment on a complete calendar, calendar columns.

Expected values are worked by hand in each test (common practice, no source). The missing-value rule
for moving averages — missing when any day of the window is missing — is the usual convention in
time-series studies of air pollution (Bhaskaran et al. 2013, Int J Epidemiol 42:1187–1195).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from airhealth.errors import DataError, DataWarning, SpecificationError
from airhealth.prep import (
    align_daily,
    complete_calendar,
    day_of_week,
    holiday_indicator,
    lag_matrix,
    lagged,
    moving_average,
    prepare_daily,
)

NAN = np.nan
X = np.array([1.0, 2.0, NAN, 4.0, 5.0, 6.0])

# --- lags and moving averages ---------------------------------------------------------------------


def test_lagged_shifts_forward_by_whole_days():
    np.testing.assert_array_equal(lagged(X, 0), X)
    np.testing.assert_array_equal(lagged(X, 1), [NAN, 1.0, 2.0, NAN, 4.0, 5.0])
    np.testing.assert_array_equal(lagged(X, 2), [NAN, NAN, 1.0, 2.0, NAN, 4.0])
    np.testing.assert_array_equal(lagged(X, 10), [NAN] * 6)


def test_lagged_accepts_series_and_rejects_negative_lags():
    s = pd.Series(X, index=list("abcdef"))
    np.testing.assert_array_equal(lagged(s, 1), [NAN, 1.0, 2.0, NAN, 4.0, 5.0])
    with pytest.raises(SpecificationError, match=r"lag must be >= 0 days, got -1"):
        lagged(X, -1)


def test_lag_matrix_columns_are_the_lags():
    m = lag_matrix(X, [0, 2])
    np.testing.assert_array_equal(m[:, 0], X)
    np.testing.assert_array_equal(m[:, 1], lagged(X, 2))
    with pytest.raises(SpecificationError, match=r"lags must be >= 0"):
        lag_matrix(X, [0, -1])


def test_moving_average_is_missing_when_any_day_is_missing():
    # lag 0-1: (x_t + x_{t-1}) / 2; day 0 lacks its lag 1, days 2 and 3 contain the missing day 2
    np.testing.assert_array_equal(moving_average(X, 0, 1), [NAN, 1.5, NAN, NAN, 4.5, 5.5])
    # lag 0-2 on days 4, 5: (4+5+NAN)/3 missing; (4+5+6)/3 = 5
    np.testing.assert_array_equal(moving_average(X, 0, 2), [NAN, NAN, NAN, NAN, NAN, 5.0])
    # lag 1-2 (yesterday and the day before): day 2 = (2+1)/2
    np.testing.assert_array_equal(moving_average(X, 1, 2), [NAN, NAN, 1.5, NAN, NAN, 4.5])


def test_moving_average_with_a_minimum_count_averages_the_days_present():
    # min_count=1 over lags 0-1: day 0 = 1 (only itself), day 2 = 2 (only yesterday), day 3 = 4
    np.testing.assert_array_equal(moving_average(X, 0, 1, min_count=1), [1.0, 1.5, 2.0, 4.0, 4.5, 5.5])
    # min_count=2 over lags 0-2: day 3 = (4 + 2)/2 = 3; day 1 = (2 + 1)/2
    np.testing.assert_array_equal(moving_average(X, 0, 2, min_count=2), [NAN, 1.5, 1.5, 3.0, 4.5, 5.0])
    # min_count equal to the width is the default rule
    np.testing.assert_array_equal(moving_average(X, 0, 2, min_count=3), moving_average(X, 0, 2))


def test_moving_average_of_a_single_lag_is_that_lag():
    np.testing.assert_array_equal(moving_average(X, 2, 2), lagged(X, 2))


@pytest.mark.parametrize(
    ("args", "message"),
    [
        ((X, -1, 1), r"0 <= first <= last"),
        ((X, 2, 1), r"0 <= first <= last"),
        ((X, 0, 1, 3), r"min_count must be between 1 and 2"),
        ((X, 0, 3, 0), r"min_count must be between 1 and 4"),
    ],
)
def test_moving_average_bad_arguments(args, message):
    with pytest.raises(SpecificationError, match=message):
        moving_average(*args)


def test_moving_average_in_a_fit_uses_the_min_count():
    import airhealth

    data = airhealth.load_sample()
    data = data[data["date"] < "2013-01-01"].reset_index(drop=True)
    strict = airhealth.fit(data, outcome="deaths_all", exposure="pm25", lag="0-1", temperature="temperature")
    lenient = airhealth.fit(
        data,
        outcome="deaths_all",
        exposure="pm25",
        temperature="temperature",
        lag=airhealth.MovingAverage(0, 1, min_count=1),
    )
    assert lenient.n_days > strict.n_days  # days with one of the two days missing are kept
    assert "exposure missing in lag window" in set(strict.dropped["reason"])
    assert "exposure missing in lag window" not in set(lenient.dropped["reason"])


# --- alignment on a complete calendar ---------------------------------------------------------------


@pytest.fixture
def tables():
    counts = pd.DataFrame({"date": pd.date_range("2020-01-01", "2020-01-10"), "deaths": np.arange(10)})
    pollution = pd.DataFrame(
        {
            "date": ["2020-01-03", "2020-01-01", "2020-01-02", "2020-01-07", "2020-01-08"],  # unsorted, gap 4-6
            "pm25": [13.0, 11.0, 12.0, 17.0, 18.0],
        }
    )
    weather = pd.DataFrame({"date": pd.date_range("2019-12-30", "2020-01-05"), "temp": np.linspace(0, 6, 7)})
    return counts, pollution, weather


def test_align_daily_keeps_every_day_and_leaves_gaps_missing(tables):
    aligned = align_daily(*tables)
    assert list(aligned.columns) == ["date", "deaths", "pm25", "temp"]
    assert pd.DatetimeIndex(aligned["date"]).equals(pd.date_range("2019-12-30", "2020-01-10", name="date"))
    row = aligned.set_index("date")
    assert row.loc["2020-01-03", "pm25"] == 13.0  # sorted by date, not by input position
    assert row.loc["2020-01-04":"2020-01-06", "pm25"].isna().all()
    assert row.loc["2020-01-07", "pm25"] == 17.0  # not shifted into the gap
    assert row.loc["2019-12-30":"2019-12-31", "deaths"].isna().all()
    assert row.loc["2020-01-06":"2020-01-10", "temp"].isna().all()
    assert row.loc["2020-01-10", "deaths"] == 9


def test_align_daily_calendar_limits(tables):
    aligned = align_daily(*tables, start="2020-01-01", end="2020-01-12")
    assert len(aligned) == 12
    assert aligned["date"].iloc[0] == pd.Timestamp("2020-01-01")
    assert aligned["deaths"].iloc[-2:].isna().all()
    with pytest.raises(DataError, match=r"calendar is empty: end 2019-01-01 is before start 2020-01-01"):
        align_daily(*tables, start="2020-01-01", end="2019-01-01")


def test_align_daily_errors_name_the_table(tables):
    counts, pollution, _ = tables
    with pytest.raises(DataError, match=r"column 'pm25' appears in both pollution and again; rename one"):
        align_daily(counts, pollution, pollution.copy(), names=("counts", "pollution", "again"))
    bad = pollution.assign(date=["2020-01-03", "2020-01-01", "2020-01-01", "2020-01-07", "2020-01-08"])
    with pytest.raises(DataError, match=r"'date' in pollution has duplicated dates: 2020-01-01"):
        align_daily(counts, bad, names=("counts", "pollution"))
    with pytest.raises(DataError, match=r"column 'day' does not exist in table 1"):
        align_daily(counts, pollution, date="day")
    with pytest.raises(DataError, match=r"needs at least one table"):
        align_daily()
    with pytest.raises(DataError, match=r"got 2 tables but 1 names"):
        align_daily(counts, pollution, names=("counts",))


def test_prepare_daily_fills_gaps_with_a_warning(tables):
    _, pollution, _ = tables
    with pytest.warns(DataWarning, match=r"3 calendar day\(s\) absent .*: 2020-01-04 to 2020-01-06\."):
        out = prepare_daily(pollution)
    assert len(out) == 8
    assert out["pm25"].tolist()[:3] == [11.0, 12.0, 13.0]
    assert np.isnan(out["pm25"].tolist()[3:6]).all()


def test_complete_calendar_lists_several_gaps():
    dates = pd.DatetimeIndex(["2020-01-01", "2020-01-03", "2020-01-04", "2020-01-08"])
    frame = pd.DataFrame({"date": dates, "v": [1.0, 3.0, 4.0, 8.0]})
    with pytest.warns(DataWarning, match=r"4 calendar day\(s\).*2020-01-02, 2020-01-05 to 2020-01-07"):
        out = complete_calendar(frame, dates)
    assert out["v"].isna().sum() == 4 and len(out) == 8


# --- calendar columns -----------------------------------------------------------------------------


def test_day_of_week_is_monday_first():
    dow = day_of_week(pd.date_range("2024-01-01", periods=7))  # 1 January 2024 was a Monday
    assert list(dow) == ["Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"]
    assert dow.ordered


def test_holidays_flag_christmas_in_great_britain():
    # 25 and 26 December and 1 January are public holidays in the UK (common knowledge, from memory);
    # 28 December 2015 was the substitute day for Boxing Day falling on a Saturday.
    dates = pd.date_range("2015-12-20", "2016-01-04")
    flag = pd.Series(holiday_indicator(dates, "GB"), index=dates)
    assert flag["2015-12-25"] == 1.0
    assert flag["2016-01-01"] == 1.0
    assert flag["2015-12-24"] == 0.0
    assert flag["2015-12-23"] == 0.0
    assert flag["2015-12-28"] == 1.0
    assert set(np.unique(flag)) == {0.0, 1.0}


def test_holidays_differ_by_country():
    dates = pd.date_range("2015-07-01", "2015-07-31")
    us = pd.Series(holiday_indicator(dates, "US"), index=dates)
    gb = pd.Series(holiday_indicator(dates, "GB"), index=dates)
    assert us["2015-07-03"] == 1.0 or us["2015-07-04"] == 1.0  # Independence Day (observed on the Friday)
    assert gb.sum() == 0.0  # no UK bank holiday in July (from memory)


def test_unknown_country_is_named():
    with pytest.raises(DataError, match=r"no public-holiday calendar for country 'ZZ'"):
        holiday_indicator(pd.date_range("2015-01-01", periods=3), "ZZ")


def test_holiday_term_in_a_fit_adds_one_column():
    import airhealth

    data = airhealth.load_sample()
    data = data[data["date"] < "2013-01-01"].reset_index(drop=True)
    a = airhealth.fit(data, outcome="deaths_all", exposure="pm25", temperature="temperature")
    b = airhealth.fit(data, outcome="deaths_all", exposure="pm25", temperature="temperature", holidays="GB")
    assert len(b.coef) == len(a.coef) + 1
    assert "holiday[GB]" in b.coef.index
