"""Daily statistics from hourly data: worked examples at each validity threshold, DST days, bad input.

Thresholds are those of EU Directive 2008/50/EC, Annexes VII (A.2 and B) and XI (A): 75 % of the hourly values
(18 of 24); 6 of 8 hours; 18 of the 24 8-h means ending in the day (checked against the published text, see
the project's references) and US EPA 40 CFR Part 50, Appendix U: the 17 8-h periods starting 07:00-23:00
(checked); Appendices N, S, T and U otherwise from memory: 18 of 24 hours; 6 of 8 hours; 13 of the 17 periods;
"valid if above the level".
Expected values are computed by hand in each test.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from airhealth.errors import AirhealthWarning, DataError, DataWarning, SpecificationError
from airhealth.prep.hourly import daily_statistic, validity_rule
from airhealth.prep.hourly_input import clean_hourly

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data" / "norhaven_hourly_no2.csv"


def hours_frame(start: str, values) -> pd.DataFrame:
    """Hourly frame starting at ``start`` (hour-start, naive local standard time); NaN = missing hour."""
    values = np.asarray(values, dtype=float)
    return pd.DataFrame({"time": pd.date_range(start, periods=len(values), freq="h"), "conc": values})


def day_row(daily: pd.DataFrame, date: str) -> pd.Series:
    return daily.set_index("date").loc[pd.Timestamp(date)]


def with_missing(values, hours) -> np.ndarray:
    out = np.array(values, dtype=float)
    out[list(hours)] = np.nan
    return out


# ---------------------------------------------------------------- 24-hour mean and daily max 1-h: 18 vs 17


@pytest.mark.parametrize("convention", ["eu", "us"])
@pytest.mark.parametrize(("missing", "valid"), [(5, True), (6, True), (7, False)])
def test_mean_needs_18_of_24_hours(convention, missing, valid):
    values = with_missing(np.arange(24.0), range(missing))  # hours 0..missing-1 missing
    daily = daily_statistic(hours_frame("2022-06-01", values), time="time", value="conc", convention=convention)
    row = day_row(daily, "2022-06-01")
    assert row["n_hours"] == 24 - missing
    assert bool(row["valid"]) is valid
    if valid:  # mean of hours missing..23 = (missing + 23) / 2, hand computation
        assert row["conc"] == pytest.approx((missing + 23) / 2, rel=1e-12)
    else:
        assert np.isnan(row["conc"])
        assert row["reason"] == "fewer than 18 valid hours"


@pytest.mark.parametrize("convention", ["eu", "us"])
@pytest.mark.parametrize(("missing", "valid"), [(6, True), (7, False)])
def test_max1h_needs_18_hours(convention, missing, valid):
    values = with_missing(np.arange(24.0), range(24 - missing, 24))  # the evening (and the peak) missing
    daily = daily_statistic(
        hours_frame("2022-06-01", values), time="time", value="conc", statistic="max1h", convention=convention
    )
    row = day_row(daily, "2022-06-01")
    assert row["n_hours"] == 24 - missing
    assert bool(row["valid"]) is valid
    assert (row["conc"] == 23 - missing) if valid else np.isnan(row["conc"])


def test_us_mean_valid_if_zero_substituted_mean_exceeds_level():
    # Appendix N (from memory): with 7+ hours missing, valid if the mean with zeros for missing hours > level.
    high = with_missing(np.full(24, 50.0), range(7))  # 17 hours of 50: 850 / 24 = 35.417 > 35
    low = with_missing(np.full(24, 50.0), range(8))  # 16 hours of 50: 800 / 24 = 33.3 < 35
    out_high = daily_statistic(
        hours_frame("2022-06-01", high), time="time", value="conc", convention="us", exceedance_level=35.0
    )
    out_low = daily_statistic(
        hours_frame("2022-06-01", low), time="time", value="conc", convention="us", exceedance_level=35.0
    )
    assert bool(out_high["valid"].iloc[0]) and out_high["conc"].iloc[0] == pytest.approx(850 / 24, rel=1e-12)
    assert not bool(out_low["valid"].iloc[0])
    without_level = daily_statistic(hours_frame("2022-06-01", high), time="time", value="conc", convention="us")
    assert not bool(without_level["valid"].iloc[0])


def test_us_max1h_valid_if_above_level():
    values = with_missing(np.full(24, 10.0), range(10))
    values[15] = 120.0  # 14 hours only, but above a 100 ppb level (1-h NO2, Appendix S, from memory)
    out = daily_statistic(
        hours_frame("2022-06-01", values),
        time="time",
        value="conc",
        statistic="max1h",
        convention="us",
        exceedance_level=100.0,
    )
    assert bool(out["valid"].iloc[0]) and out["conc"].iloc[0] == 120.0


def test_eu_has_no_exceedance_clause():
    with pytest.raises(SpecificationError, match="convention='us' only"):
        validity_rule("mean", "eu", exceedance_level=35.0)


# ---------------------------------------------------------------- 8-hour means: 6 vs 5 of 8 hours


@pytest.mark.parametrize("convention", ["eu", "us"])
def test_eight_hour_mean_needs_6_of_8_hours(convention):
    # Three days at 10 ppb; on day 2, hours 12-19 are 100. Hours 13 and 15 missing: window 12-19 keeps 6
    # hours (mean 100). Also 17 missing: it keeps 5 and is not valid; the best valid window is then 14-21:
    # hours 14, 16, 18, 19 = 100 and 20, 21 = 10, i.e. (400 + 20) / 6 = 70 (hand computation). No window
    # loses 3+ hours in the six case; in the five case the 4 windows starting 10-13 do, leaving 20 of 24
    # (EU) and 13 of 17 (US), so the day stays valid under both conventions.
    base = np.full(72, 10.0)
    base[24 + 12 : 24 + 20] = 100.0
    six = with_missing(base, [24 + 13, 24 + 15])
    five = with_missing(base, [24 + 13, 24 + 15, 24 + 17])
    kwargs = {"time": "time", "value": "conc", "statistic": "max8h", "convention": convention}
    got_six = day_row(daily_statistic(hours_frame("2022-06-01", six), **kwargs), "2022-06-02")
    got_five = day_row(daily_statistic(hours_frame("2022-06-01", five), **kwargs), "2022-06-02")
    assert got_six["conc"] == pytest.approx(100.0, rel=1e-12)
    assert got_five["conc"] == pytest.approx(70.0, rel=1e-12)
    assert got_five["n_8h_means"] == (20 if convention == "eu" else 13)


def test_us_eight_hour_window_substitution_above_level():
    # Appendix U (from memory; unsure): a window with < 6 hours counts if, with zeros for missing hours,
    # its mean exceeds the level. Five hours of 100 -> 500 / 8 = 62.5 > 60.
    values = np.full(72, np.nan)
    values[24 + 12 : 24 + 17] = 100.0
    kwargs = {"time": "time", "value": "conc", "statistic": "max8h", "convention": "us"}
    plain = day_row(daily_statistic(hours_frame("2022-06-01", values), **kwargs), "2022-06-02")
    assert not bool(plain["valid"]) and plain["n_8h_means"] == 0
    rescued = day_row(daily_statistic(hours_frame("2022-06-01", values), exceedance_level=60.0, **kwargs), "2022-06-02")
    assert bool(rescued["valid"]) and rescued["conc"] == pytest.approx(62.5, rel=1e-12)


# ---------------------------------------------------------------- daily max 8-h: 18 vs 17 (EU), 13 vs 12 (US)


@pytest.mark.parametrize(("block", "count", "valid"), [(3, 18, True), (4, 17, False)])
def test_eu_daily_max8h_needs_18_valid_means(block, count, valid):
    # A block of L >= 3 missing hours starting at 10:00 spoils the L + 3 windows that hold >= 3 of them
    # (ending 12:00 .. 12+L+2), all ending inside the day: 24 - (L + 3) valid means (hand count).
    values = with_missing(np.full(72, 20.0), range(24 + 10, 24 + 10 + block))
    out = daily_statistic(hours_frame("2022-06-01", values), time="time", value="conc", statistic="max8h")
    row = day_row(out, "2022-06-02")
    assert row["n_8h_means"] == count
    assert bool(row["valid"]) is valid
    if not valid:
        assert row["reason"] == "fewer than 18 of 24 valid 8-h means"


@pytest.mark.parametrize(("first_missing", "count", "valid"), [(9, 14, True), (10, 13, True), (11, 12, False)])
def test_us_daily_max8h_needs_13_of_17(first_missing, count, valid):
    # Three missing hours a..a+2 spoil the windows starting a-5..a; of those, the ones starting at 07:00 or
    # later are among the 17 counted: a = 9 -> 7, 8, 9 (3 lost, 14 left); a = 10 -> 4 lost; a = 11 -> 5 lost.
    values = with_missing(np.full(72, 20.0), range(24 + first_missing, 24 + first_missing + 3))
    out = daily_statistic(
        hours_frame("2022-06-01", values), time="time", value="conc", statistic="max8h", convention="us"
    )
    row = day_row(out, "2022-06-02")
    assert row["n_8h_means"] == count
    assert bool(row["valid"]) is valid


def test_eu_window_assigned_to_day_it_ends_us_to_day_it_starts():
    # A high evening on day 1 (17:00-24:00 = 80, else 10). EU: the window 17:00-01:00 ends on day 2 at 01:00,
    # so day 2's maximum includes 7 hours of 80 and one of 10: (7 * 80 + 10) / 8 = 71.25.
    # US: the same windows start on day 1 and belong to day 1; day 2 stays at 10.
    values = np.full(72, 10.0)
    values[17:24] = 80.0
    kwargs = {"time": "time", "value": "conc", "statistic": "max8h"}
    eu = daily_statistic(hours_frame("2022-06-01", values), **kwargs)
    us = daily_statistic(hours_frame("2022-06-01", values), convention="us", **kwargs)
    assert day_row(eu, "2022-06-02")["conc"] == pytest.approx(71.25, rel=1e-12)
    assert day_row(us, "2022-06-02")["conc"] == pytest.approx(10.0, rel=1e-12)
    # The US daily maximum of day 1 is the window 16:00-24:00 = (10 + 7 * 80) / 8 = 71.25 as well
    assert day_row(us, "2022-06-01")["conc"] == pytest.approx(71.25, rel=1e-12)
    # Day 2's EU 8-h maximum exceeds day 2's own maximum 1-h value (10): windows reach into day 1.
    max1h = daily_statistic(hours_frame("2022-06-01", values), time="time", value="conc", statistic="max1h")
    assert day_row(max1h, "2022-06-02")["conc"] == 10.0


# ---------------------------------------------------------------- hour-ending labels and time zones


def test_hour_ending_labels_shift_by_one_hour():
    start_labelled = hours_frame("2022-06-01 00:00", np.arange(48.0))
    end_labelled = start_labelled.assign(time=start_labelled["time"] + pd.Timedelta(hours=1))
    a = daily_statistic(start_labelled, time="time", value="conc")
    b = daily_statistic(end_labelled, time="time", value="conc", hour_label="end")
    pd.testing.assert_frame_equal(a, b)
    # "24:00" is the end of the day
    text = pd.DataFrame({"time": ["2022-06-01 23:00", "2022-06-01 24:00"], "conc": [1.0, 2.0]})
    clean = clean_hourly(text, time="time", value="conc", hour_label="end")
    assert list(clean["hour"]) == [pd.Timestamp("2022-06-01 22:00"), pd.Timestamp("2022-06-01 23:00")]


def wall_day(date: str, zone: str) -> pd.DataFrame:
    """Local-clock readings from 12:00 UTC the day before, for 64 hours; value = 100 + hours since 00:00 UTC."""
    utc = pd.date_range(pd.Timestamp(date) - pd.Timedelta(hours=12), periods=64, freq="h", tz="UTC")
    local = utc.tz_convert(zone)
    return pd.DataFrame(
        {
            "time": local.tz_localize(None),
            "offset_time": local.strftime("%Y-%m-%dT%H:%M%z"),
            "conc": 100 + (utc - pd.Timestamp(date, tz="UTC")) / pd.Timedelta(hours=1),
        }
    )


@pytest.mark.parametrize(("date", "wall_hours"), [("2022-03-27", 23), ("2022-10-30", 25)])
def test_daylight_saving_days_in_standard_and_wall_clock(date, wall_hours):
    # Europe/Oslo: CET (UTC+1) in winter, CEST (UTC+2) in summer; spring forward 27 Mar 2022 02:00 -> 03:00,
    # fall back 30 Oct 2022 03:00 -> 02:00 (IANA tz database). The standard-time day is 00:00-24:00 CET =
    # 23:00 UTC the day before .. 23:00 UTC: 24 hours, with values 99 .. 122, mean 110.5.
    data = wall_day(date, "Europe/Oslo")
    common = {"time": "time", "value": "conc", "timezone": "Europe/Oslo", "times_in": "wall"}
    standard = day_row(daily_statistic(data, **common), date)
    assert standard["n_hours"] == 24
    assert standard["conc"] == pytest.approx(110.5, rel=1e-12)
    wall = day_row(daily_statistic(data, day_clock="wall", **common), date)
    assert wall["n_hours"] == wall_hours
    # Wall-clock day: from local midnight (UTC-1 in spring, since CET; UTC-2 in autumn, since CEST)
    first = -1 if wall_hours == 23 else -2
    assert wall["conc"] == pytest.approx(100 + first + (wall_hours - 1) / 2, rel=1e-12)
    # The same readings with UTC offsets in the text give the same standard-time day.
    offsets = daily_statistic(data, time="offset_time", value="conc", timezone="Europe/Oslo")
    assert day_row(offsets, date)["conc"] == pytest.approx(110.5, rel=1e-12)


def test_dst_day_eight_hour_windows_span_real_hours():
    # On the spring-forward day in wall clock the 8-h windows are still 8 real hours: 23 windows end in the
    # 23-hour wall day (EU), all valid.
    data = wall_day("2022-03-27", "Europe/Oslo")
    out = daily_statistic(
        data,
        time="time",
        value="conc",
        statistic="max8h",
        timezone="Europe/Oslo",
        times_in="wall",
        day_clock="wall",
    )
    row = day_row(out, "2022-03-27")
    assert row["n_8h_means"] == 23
    # Last window ends with the hour starting 23:00 CEST = 21:00 UTC (value 121): mean of 114..121 = 117.5
    assert row["conc"] == pytest.approx(117.5, rel=1e-12)


def test_utc_input_and_standard_input_agree():
    utc = hours_frame("2022-01-09 23:00", np.arange(26.0))  # UTC; CET day 10 Jan = 23:00 UTC 9 Jan + 24 h
    out = daily_statistic(utc, time="time", value="conc", timezone="Europe/Oslo", times_in="utc")
    assert day_row(out, "2022-01-10")["conc"] == pytest.approx(11.5, rel=1e-12)


def test_nonexistent_wall_time_is_an_error():
    bad = pd.DataFrame({"time": ["2022-03-27 01:00", "2022-03-27 02:00", "2022-03-27 03:00"], "conc": 1.0})
    with pytest.raises(DataError) as info:
        daily_statistic(bad, time="time", value="conc", timezone="Europe/Oslo", times_in="wall")
    message = str(info.value)
    assert "do not exist" in message and "in rows 1 (e.g. 2022-03-27 02:00)" in message
    assert "times_in='standard'" in message and "nonexistent" not in message  # no pandas option names


def test_repeated_fall_back_hour_once_is_an_error_naming_rows():
    # 02:00 on 2022-10-30 occurs twice in Europe/Oslo; with one reading its order cannot tell which one it is
    times = ["2022-10-30 00:00", "2022-10-30 01:00", "2022-10-30 02:00", "2022-10-30 03:00"]
    bad = pd.DataFrame({"time": times, "conc": 1.0}, index=[10, 11, 12, 13])
    with pytest.raises(DataError) as info:
        clean_hourly(bad, time="time", value="conc", timezone="Europe/Oslo", times_in="wall")
    message = str(info.value)
    assert "occur twice" in message and "rows 12 (e.g. 2022-10-30 02:00)" in message
    assert "ambiguous" not in message


def test_offsets_without_timezone_is_an_error():
    data = wall_day("2022-03-27", "Europe/Oslo")
    with pytest.raises(DataError, match="pass timezone"):
        daily_statistic(data, time="offset_time", value="conc")


# ---------------------------------------------------------------- bad input


def test_duplicated_timestamps_error_lists_them():
    data = hours_frame("2022-06-01", np.arange(24.0))
    data = pd.concat([data, data.iloc[[3, 5]]], ignore_index=True)
    with pytest.raises(DataError, match=r"row 3: monitor 'all' hour 2022-06-01 03:00.*row 5") as info:
        daily_statistic(data, time="time", value="conc")
    assert "row 24" in str(info.value) and "duplicates='mean'" in str(info.value)
    averaged = daily_statistic(data, time="time", value="conc", duplicates="mean")
    assert averaged["conc"].iloc[0] == pytest.approx(11.5, rel=1e-12)


def test_duplicates_mean_averages_the_pair():
    data = pd.DataFrame({"time": ["2022-06-01 00:00"] * 2 + ["2022-06-01 01:00"], "conc": [1.0, 3.0, 5.0]})
    clean = clean_hourly(data, time="time", value="conc", duplicates="mean")
    assert clean["value"].tolist() == [2.0, 5.0]
    first = clean_hourly(data, time="time", value="conc", duplicates="first")
    assert first["value"].tolist() == [1.0, 5.0]


def test_non_numeric_value_names_the_row():
    data = pd.DataFrame({"time": pd.date_range("2022-06-01", periods=4, freq="h"), "conc": ["1", "2", "n/a", ""]})
    with pytest.raises(DataError, match=r"rows 2 \(e\.g\. 'n/a'\)"):
        clean_hourly(data, time="time", value="conc")
    ok = clean_hourly(data.iloc[[0, 1, 3]], time="time", value="conc")  # empty cell = missing hour
    assert ok["value"].isna().tolist() == [False, False, True]


def test_negative_values_flagged_kept_or_dropped():
    data = hours_frame("2022-06-01", [-1.0] + [10.0] * 23)
    with pytest.warns(DataWarning, match="1 negative values.*kept"):
        kept = daily_statistic(data, time="time", value="conc")
    assert kept["conc"].iloc[0] == pytest.approx(229 / 24, rel=1e-12)
    with pytest.warns(DataWarning, match="set to missing"):
        dropped = daily_statistic(data, time="time", value="conc", negative="drop")
    assert dropped["conc"].iloc[0] == pytest.approx(10.0, rel=1e-12) and dropped["n_hours"].iloc[0] == 23
    with pytest.raises(DataError, match="rows 0"):
        daily_statistic(data, time="time", value="conc", negative="error")


def test_unsorted_timestamps_are_sorted_with_a_warning():
    data = hours_frame("2022-06-01", np.arange(30.0))
    shuffled = data.sample(frac=1.0, random_state=3)
    with pytest.warns(DataWarning, match="sorted"):
        got = daily_statistic(shuffled, time="time", value="conc", statistic="max8h")
    pd.testing.assert_frame_equal(got, daily_statistic(data, time="time", value="conc", statistic="max8h"))


def test_unreadable_and_off_hour_times_name_rows():
    bad_text = pd.DataFrame({"time": ["2022-06-01 00:00", "yesterday"], "conc": [1.0, 2.0]})
    with pytest.raises(DataError, match=r"rows 1 \(e\.g\. 'yesterday'\)"):
        clean_hourly(bad_text, time="time", value="conc")
    half = pd.DataFrame({"time": ["2022-06-01 00:00", "2022-06-01 00:30"], "conc": [1.0, 2.0]})
    with pytest.raises(DataError, match="not on the full hour in rows 1"):
        clean_hourly(half, time="time", value="conc")
    with pytest.raises(DataError, match="'nope' is not in"):
        clean_hourly(half, time="nope", value="conc")


def test_input_frame_is_not_modified():
    data = hours_frame("2022-06-01", with_missing(np.arange(48.0), [3]))
    before = data.copy(deep=True)
    daily_statistic(data, time="time", value="conc", statistic="max8h", convention="us")
    pd.testing.assert_frame_equal(data, before)


# ---------------------------------------------------------------- properties (Hypothesis)

hourly_values = st.lists(
    st.one_of(st.none(), st.floats(min_value=0.0, max_value=500.0, allow_nan=False)), min_size=72, max_size=72
)


def _frame(values) -> pd.DataFrame:
    return hours_frame("2022-06-01", [np.nan if v is None else v for v in values])


@settings(max_examples=40, deadline=None)
@given(hourly_values)
def test_property_mean_never_exceeds_max1h(values):
    data = _frame(values)
    mean = daily_statistic(data, time="time", value="conc")["conc"].to_numpy()
    largest = daily_statistic(data, time="time", value="conc", statistic="max1h")["conc"].to_numpy()
    both = ~np.isnan(mean) & ~np.isnan(largest)
    assert np.all(mean[both] <= largest[both] + 1e-9 * np.maximum(1.0, largest[both]))


@settings(max_examples=30, deadline=None)
@given(hourly_values, st.integers(0, 71), st.sampled_from(["mean", "max1h", "max8h"]), st.sampled_from(["eu", "us"]))
def test_property_removing_an_hour_never_validates_a_day(values, drop, statistic, convention):
    # Holds without the US exceedance clauses (dropping a low hour can raise an 8-h mean above a level).
    data = _frame(values)
    fewer = data.assign(conc=data["conc"].where(data.index != drop))
    kw = {"time": "time", "value": "conc", "statistic": statistic, "convention": convention}
    before = daily_statistic(data, **kw).set_index("date")["valid"]
    after = daily_statistic(fewer, **kw).set_index("date")["valid"].reindex(before.index, fill_value=False)
    assert not np.any(after.to_numpy() & ~before.to_numpy())


@settings(max_examples=30, deadline=None)
@given(hourly_values, st.sampled_from(["eu", "us"]))
def test_property_max8h_within_hourly_range_of_its_windows(values, convention):
    # A day's 8-h maximum is at most the largest hour its windows cover: EU 17:00 the day before .. 23:00,
    # US 07:00 .. 06:00 the next day. (It can exceed the day's own 1-h maximum; see the worked example.)
    data = _frame(values)
    out = daily_statistic(data, time="time", value="conc", statistic="max8h", convention=convention)
    series = data.set_index("time")["conc"]
    for day, value in zip(out["date"], out["conc"], strict=True):
        if np.isnan(value):
            continue
        first = day - pd.Timedelta(hours=7) if convention == "eu" else day + pd.Timedelta(hours=7)
        span = series[first : first + pd.Timedelta(hours=30)]
        assert value <= span.max() + 1e-9 * max(1.0, span.max())
        # and, where the whole span equals the day, the 1-h maximum bounds it
        same_day = series[day : day + pd.Timedelta(hours=23)].max()
        if span.max() == same_day:
            assert value <= same_day + 1e-9 * max(1.0, same_day)


# ---------------------------------------------------------------- sample data


def test_sample_two_years_three_monitors_aggregate():
    data = pd.read_csv(SAMPLE)
    with warnings.catch_warnings():
        # the sample has no negatives, duplicates or disorder (airhealth's warnings only; a library's
        # deprecation notice is not a failure here)
        warnings.simplefilter("error", AirhealthWarning)
        out = daily_statistic(data, time="time", value="no2_ppb", monitor="monitor", statistic="max8h")
    assert set(out["monitor"]) == {"NHC", "NHH", "NHP"}
    assert out.groupby("monitor")["date"].agg(["min", "max"]).loc["NHC"].tolist() == [
        pd.Timestamp("2022-01-01"),
        pd.Timestamp("2023-12-31"),
    ]


def test_us_daily_max8h_valid_with_few_means_if_above_level():
    # Appendix U (from memory): a day with < 13 valid 8-h periods still counts if its maximum exceeds the level.
    values = np.full(72, np.nan)
    values[24 + 10 : 24 + 18] = 90.0  # one 8-hour block only: windows starting 10 (8 h) .. 12 (6 h) valid
    kwargs = {"time": "time", "value": "conc", "statistic": "max8h", "convention": "us"}
    plain = day_row(daily_statistic(hours_frame("2022-06-01", values), **kwargs), "2022-06-02")
    # valid windows start 8, 9 (6 and 7 hours), 10, 11, 12 (8, 7, 6 hours): 5 of 17
    assert plain["n_8h_means"] == 5 and not bool(plain["valid"])
    rescued = day_row(daily_statistic(hours_frame("2022-06-01", values), exceedance_level=70.0, **kwargs), "2022-06-02")
    assert bool(rescued["valid"]) and rescued["conc"] == pytest.approx(90.0, rel=1e-12)


# ---------------------------------------------------------------- rule sources


@pytest.mark.parametrize(
    ("statistic", "clause"),
    [("mean", "Annex XI A (24-hour values: 75 % of the hourly values = 18 of 24)"), ("max8h", "Annex VII A.2 and B")],
)
def test_eu_rule_sources_name_the_checked_clause_without_memory_caveat(statistic, clause):
    # The project's references mark Annex VII A.2/B and the 75 % rule of Annex XI A as checked against the
    # published Directive 2008/50/EC (2026-12-02), so the label printed by `airhealth daily` and shown in
    # reports names the clause and carries no "from memory".
    source = validity_rule(statistic, "eu").source
    assert source.startswith("Directive 2008/50/EC, ") and clause in source
    assert "memory" not in source


@pytest.mark.parametrize("statistic", ["mean", "max1h", "max8h"])
def test_us_rule_sources_still_say_which_parts_are_from_memory(statistic):
    # The references still list the US completeness thresholds (Appendices N, S, T; 13 of 17 and 6 of 8 in
    # Appendix U) as from memory; only Appendix U's 17 periods from 07:00 are checked.
    source = validity_rule(statistic, "us").source
    assert source.startswith("40 CFR Part 50, Appendi") and "from memory" in source
    assert ("07:00-23:00" in source) == (statistic == "max8h")
