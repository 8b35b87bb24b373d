"""Sensitivity analyses: every row equals the corresponding single fit; bad settings give clear messages.

Reference: the single fit :func:`airhealth.fit` (itself checked against statsmodels and base R glm in
test_against_r.py and test_fit_statsmodels.py) on the same data, with the setting changed by hand: the option
passed directly, or the outcome made missing on the days left out. The exposure threshold is recomputed
here independently (pandas rolling mean and ``numpy.percentile``). Both paths run the same engine to its
convergence tolerance of 1e-10 on the deviance, so every reported number must agree to 1e-8 relative
(the issue's requirement); a wrong day left out or a stale setting moves the estimate by far more.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.errors import DataError, DataWarning, SpecificationError
from airhealth.studies.sensitivity import SENSITIVITY_COLUMNS, sensitivity

RTOL = 1e-8
CHECKED = ["coef", "se", "rr", "rr_low", "rr_high", "p_value", "dispersion", "qaic"]
MAIN = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature", "lag": "0-1"}


@pytest.fixture(scope="module")
def six_years():
    """Six years of the Norhaven sample (keeps the tests fast)."""
    data = airhealth.load_sample()
    return data[data["date"] < "2016-01-01"].reset_index(drop=True)


def single(data, **options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return airhealth.fit(data, **{**MAIN, **options}).to_dict()


def assert_row_equals(row, reference):
    for name in CHECKED:
        assert row[name] == pytest.approx(reference[name], rel=RTOL), name
    assert row["n_days"] == reference["n_days"]


def run(data, checks, **options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return sensitivity(data, checks=checks, **{**MAIN, **options})


def test_model_option_rows_equal_single_fits(six_years):
    checks = {"trend_df_per_year": [4, 10], "temperature_df": [3], "temperature_lags": [(1, 7), None]}
    table = run(six_years, checks, humidity="humidity")
    assert list(table.columns) == SENSITIVITY_COLUMNS
    assert list(table["check"]) == ["main", *["trend_df_per_year"] * 2, "temperature_df", *["temperature_lags"] * 2]
    rows = table.to_dict(orient="records")
    assert_row_equals(rows[0], single(six_years, humidity="humidity"))
    expected = [
        {"trend_df_per_year": 4}, {"trend_df_per_year": 10}, {"temperature_df": 3},
        {"temperature_lags": (1, 7)}, {"temperature_lags": None},
    ]  # fmt: skip
    for row, change in zip(rows[1:], expected, strict=True):
        assert_row_equals(row, single(six_years, humidity="humidity", **change))
    assert table["coef"].nunique() == len(table)  # every setting really changed the model


def test_humidity_and_holidays_switched_on_and_off(six_years):
    table = run(six_years, {"humidity": ["humidity"], "holidays": ["GB"]})
    assert list(table["setting"]) == ["main model", "with humidity (humidity)", "with holidays (GB)"]
    assert_row_equals(table.iloc[1], single(six_years, humidity="humidity"))
    assert_row_equals(table.iloc[2], single(six_years, holidays="GB"))
    off = run(six_years, {"humidity": [None]}, humidity="humidity")
    assert_row_equals(off.iloc[1], single(six_years))


def test_main_model_marked_and_a_repeated_main_setting_flagged(six_years):
    table = run(six_years, {"trend_df_per_year": [4, 7]})
    assert list(table["is_main"]) == [True, False, True]  # 7 df/year is the main model's value
    assert table.loc[2, "coef"] == pytest.approx(table.loc[0, "coef"], rel=RTOL)


def test_extreme_exposure_days_left_out_equal_fit_without_them(six_years):
    table = run(six_years, {"exclude_above_percentile": [99, 95.5]})
    main = airhealth.fit(six_years, **MAIN)
    # independent threshold: the 0-1 moving average (pandas) on the days the main model uses
    average = six_years["pm25"].rolling(2, min_periods=2).mean()
    used = six_years["date"].isin(main.fitted.index)
    for row, percentile in zip(table.iloc[1:].to_dict(orient="records"), (99, 95.5), strict=True):
        threshold = np.percentile(average[used], percentile)
        # no day within rounding of the threshold (pandas' running sums differ from a plain mean in the last bit)
        assert np.min(np.abs(average[used] - threshold)) > 1e-9
        drop = used & (average > threshold)
        assert row["n_excluded"] == drop.sum() > 0
        changed = six_years.assign(deaths_all=six_years["deaths_all"].astype(float).mask(drop))
        assert_row_equals(row, single(changed))
        assert f"{percentile}th percentile" in row["setting"]
    assert list(six_years.columns) == list(airhealth.load_sample().columns)  # caller's data untouched


def test_distributed_lag_leaves_out_days_whose_window_holds_an_extreme_day(six_years):
    table = run(six_years, {"exclude_above_percentile": 99}, lag="dl0-2")
    main = airhealth.fit(six_years, **{**MAIN, "lag": "dl0-2"})
    window = pd.concat([six_years["pm25"].shift(k) for k in range(3)], axis=1)
    highest = window.max(axis=1, skipna=False)
    used = six_years["date"].isin(main.fitted.index)
    drop = used & (highest > np.percentile(highest[used], 99))
    changed = six_years.assign(deaths_all=six_years["deaths_all"].astype(float).mask(drop))
    assert table.loc[1, "n_excluded"] == drop.sum()
    assert_row_equals(table.iloc[1], single(changed, lag="dl0-2"))


def test_named_periods_left_out_one_at_a_time(six_years):
    periods = {"epidemic": ("2012-01-10", "2012-02-20"), "heat wave": ("2013-07-01", "2013-07-20")}
    given = six_years.assign(date=six_years["date"].dt.strftime("%Y-%m-%d"))  # text dates, as read from a CSV
    before = given.copy(deep=True)
    table = run(given, {"exclude_periods": periods, "exclude_above_percentile": 99})
    pd.testing.assert_frame_equal(given, before)  # the caller's data are never changed
    table = table[table["check"] != "exclude_above_percentile"].reset_index(drop=True)
    assert list(table["setting"])[1:] == [
        "epidemic (2012-01-10 to 2012-02-20)",
        "heat wave (2013-07-01 to 2013-07-20)",
    ]
    for row, (start, end) in zip(table.iloc[1:].to_dict(orient="records"), periods.values(), strict=True):
        inside = six_years["date"].between(start, end)
        changed = six_years.assign(deaths_all=six_years["deaths_all"].astype(float).mask(inside))
        assert_row_equals(row, single(changed))
        assert row["n_excluded"] == inside.sum()


def test_default_checks_follow_the_main_model(six_years):
    table = run(six_years, None, humidity="humidity", holidays="GB")
    assert list(table["check"].unique()) == [
        "main", "trend_df_per_year", "temperature_df", "temperature_lags", "humidity", "holidays",
        "exclude_above_percentile",
    ]  # fmt: skip
    assert list(table.loc[table["check"] == "trend_df_per_year", "setting"]) == [
        f"{v} df/year" for v in (4, 6, 8, 10, 12)
    ]
    assert table["error"].isna().all()


def test_a_setting_leaving_too_few_days_keeps_its_row_with_the_fit_error(six_years):
    short = six_years[six_years["date"] < "2012-01-01"]
    with pytest.raises(DataError) as single_error:
        airhealth.fit(short, **MAIN, trend_df_per_year=30)
    with pytest.warns(DataWarning, match=r"1 of 3 sensitivity settings could not be fitted — trend_df_per_year"):
        table = sensitivity(short, checks={"trend_df_per_year": [4, 30]}, **MAIN)
    failed = table.iloc[2]
    assert failed["error"] == str(single_error.value)
    assert "80 parameters for 705 usable days" in failed["error"]
    assert np.isnan(failed["rr"]) and failed["setting"] == "30 df/year"
    assert_row_equals(table.iloc[1], single(short, trend_df_per_year=4))  # the other rows are computed


def test_an_exclusion_leaving_too_few_days_keeps_its_row(six_years):
    short = six_years[six_years["date"] < "2012-01-01"]
    table = run(short, {"exclude_periods": {"most": ("2010-01-01", "2011-10-31")}})
    assert "too few usable days" in table.loc[1, "error"] or "days per parameter" in table.loc[1, "error"]
    assert table.loc[1, "n_excluded"] > 600


@pytest.mark.parametrize(
    ("checks", "error", "message"),
    [
        ({"trend_df_per_year": []}, SpecificationError, r"check 'trend_df_per_year' has an empty list of values"),
        ({}, SpecificationError, r"checks must be a non-empty mapping"),
        ({"trend": [4]}, SpecificationError, r"unknown sensitivity check 'trend'; use 'exclude_above_percentile'"),
        ({"exclude_above_percentile": 0}, SpecificationError, r"strictly between 0 and 100 .* got 0"),
        ({"exclude_above_percentile": [99, 100]}, SpecificationError, r"strictly between 0 and 100 .* got 100"),
        ({"exclude_above_percentile": True}, SpecificationError, r"got True"),
        ({"temperature_df": [0]}, SpecificationError, r"temperature_df must be a whole number >= 1, got 0"),
        ({"exclude_periods": {}}, SpecificationError, r"non-empty mapping of name to \(start, end\)"),
        ({"exclude_periods": {"x": "2012-01-01"}}, SpecificationError, r"period 'x' must be a pair"),
        (
            {"exclude_periods": {"flu": ("2030-01-01", "2030-02-01")}},
            DataError,
            r"exclusion period 'flu': no row of the data falls in the period 2030-01-01 to 2030-02-01: its dates "
            r"run from 2010-01-01 to 2015-12-31",
        ),
        (
            {"exclude_periods": {"flu": ("2012-02-01", "2012-01-01")}},
            SpecificationError,
            r"exclusion period 'flu': the period is empty: end 2012-01-01 is before start 2012-02-01",
        ),
        (
            {"exclude_periods": {"flu": ("01/02/2012", "2012-03-01")}},
            SpecificationError,
            r"exclusion period 'flu': start '01/02/2012' is not a date in ISO form",
        ),
        (
            {"exclude_periods": {"flu": ("2012-01-01", "2012-02-10"), "heat": ("2012-02-01", "2012-03-01")}},
            SpecificationError,
            r"periods 'flu' and 'heat' overlap on 10 days \(2012-02-01 to 2012-02-10\)",
        ),
    ],
)
def test_bad_settings_are_refused_with_a_clear_message(six_years, checks, error, message):
    with pytest.raises(error, match=message):
        run(six_years, checks)


def test_bad_value_is_refused_before_anything_is_fitted(six_years, monkeypatch):
    from airhealth.studies import sensitivity as module

    monkeypatch.setattr(module, "fit_spec", lambda *a, **k: pytest.fail("fitted before checking"))
    with pytest.raises(SpecificationError, match="between 0 and 100"):
        run(six_years, {"trend_df_per_year": [4], "exclude_above_percentile": 150})


def test_progress_is_shown_only_when_asked(six_years, monkeypatch):
    import io

    from airhealth.studies import sweep as sweep_module

    stream = io.StringIO()
    real = sweep_module.progress
    monkeypatch.setattr(sweep_module, "progress", lambda *a, **k: real(*a, **{**k, "stream": stream}))
    run(six_years, {"trend_df_per_year": [4, 5]}, show_progress=True)
    assert "trend_df_per_year 2/2" in stream.getvalue()
    stream.truncate(0)
    run(six_years, {"trend_df_per_year": [4, 5]})
    assert stream.getvalue() == ""


def test_sweep_keeps_or_raises_a_failing_value(six_years):
    from airhealth.studies.sweep import sweep

    short = six_years[six_years["date"] < "2012-01-01"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        kept = sweep(short, "trend_df_per_year", [4, 30], on_error="keep", **MAIN)
        assert list(kept.columns)[-1] == "error" and kept["error"].isna().tolist() == [True, False]
        assert "80 parameters for 705 usable days" in kept.loc[1, "error"] and np.isnan(kept.loc[1, "coef"])
        assert "error" not in sweep(short, "trend_df_per_year", [4], **MAIN).columns
        with pytest.raises(DataError, match="80 parameters for 705 usable days"):
            sweep(short, "trend_df_per_year", [4, 30], **MAIN)
        with pytest.raises(SpecificationError, match="on_error"):
            sweep(short, "trend_df_per_year", [4], on_error="skip", **MAIN)


def test_a_non_linear_exposure_term_is_refused(six_years):
    lag = "spline(df=3) x dl0-3:poly2"
    with pytest.raises(SpecificationError, match=r"sensitivity compares one relative risk per setting, and lag"):
        run(six_years, {"exclude_above_percentile": 99}, lag=lag)
    with pytest.raises(SpecificationError, match=r"non-linear exposure-response term, which has no single"):
        airhealth.choose_time_df(six_years, **{**MAIN, "lag": lag})
