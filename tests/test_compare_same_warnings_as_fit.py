"""compare(), compare_results() and sweep() give the warnings and errors fit() gives on the same data.

Reference: :func:`airhealth.fit` itself, one call per structure (or per swept value) on the same data. A
comparison must run the same checks (data, design, fit-level warnings), so the set of warning messages it
gives equals the union of those the single fits give, and a structure that cannot be fitted raises the
single fit's error, message for message. Each bad data set below is one a user meets: intermittent monitoring
(every third day), few events per day, a lag window that loses many days, a series too short for the model,
and strongly over-dispersed counts. The data are the invented Norhaven sample, changed with fixed seeds.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.errors import AirhealthError
from airhealth.studies import compare as compare_module
from airhealth.studies.compare import compare, compare_results
from airhealth.studies.sweep import sweep

OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}


@pytest.fixture(scope="module")
def three_years():
    data = airhealth.load_sample()
    return data[data["date"] < "2013-01-01"].reset_index(drop=True)


@pytest.fixture(scope="module")
def six_years_every_third_day():
    """Monitoring every third day for six years: enough days per parameter for single-day lags."""
    data = airhealth.load_sample()
    return intermittent(data[data["date"] < "2016-01-01"].reset_index(drop=True))


def outcome_of(call):
    """(set of (category, message) warnings, (error type, message) or None) of ``call()``."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        error = None
        try:
            call()
        except AirhealthError as exc:
            error = (type(exc), str(exc))
    return {(w.category, str(w.message)) for w in caught}, error


def compare_own_days(data, lags, **options):
    """compare() with each structure on its own days, as its single fit (the warning that QAIC values on
    different days are not comparable is compare's own, tested in tests/test_compare_qaic.py)."""
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message="the models compared use different days")
        return compare(data, lags, common_days=False, **options)


def single_fits(data, lags, **options):
    """What one fit per structure gives: the union of warnings and the first error (fits stop there)."""
    seen: set = set()
    for lag in lags:
        found, error = outcome_of(lambda lag=lag: airhealth.fit(data, lag=lag, **{**OPTIONS, **options}))
        seen |= found
        if error is not None:
            return seen, error
    return seen, None


def intermittent(data):
    """Monitoring every third day, as for many particulate monitors."""
    out = data.copy()
    out.loc[out.index % 3 != 0, "pm25"] = np.nan
    return out


def few_events(data):
    """Daily counts of a rare cause: mean about 0.6 per day."""
    out = data.copy()
    out["deaths_all"] = np.random.default_rng(3).poisson(out["deaths_all"] / 60.0)
    return out


def scattered_gaps(data):
    """12% of exposure days missing at random: a 0-5 window loses about half the days."""
    out = data.copy()
    out.loc[np.random.default_rng(4).random(len(out)) < 0.12, "pm25"] = np.nan
    return out


def over_dispersed(data):
    """Counts multiplied by a gamma frailty with variance 1 (dispersion far above 5)."""
    out = data.copy()
    frailty = np.random.default_rng(5).gamma(1.0, 1.0, len(out))
    out["deaths_all"] = np.random.default_rng(6).poisson(out["deaths_all"] * frailty)
    return out


CASES = {
    "few events": (few_events, ["0", "0-1"]),
    "long lag window losses": (scattered_gaps, ["0", "0-2", "0-5"]),
    "over-dispersed counts": (over_dispersed, ["0", "0-1"]),
}


@pytest.mark.parametrize("case", list(CASES))
def test_compare_gives_the_warnings_of_the_single_fits(three_years, case):
    change, lags = CASES[case]
    data = change(three_years)
    expected, error = single_fits(data, lags)
    assert error is None and expected, "the case should fit with warnings"
    assert outcome_of(lambda: compare_own_days(data, lags, **OPTIONS)) == (expected, None)
    assert outcome_of(lambda: compare_results(data, lags, **OPTIONS)) == (expected, None)


def test_the_expected_warnings_are_the_ones_each_case_is_about(three_years):
    """Guards the cases themselves: each really triggers the warning it is named after."""
    wanted = {
        "few events": "few events",
        "long lag window losses": "missing day in the lag window",
        "over-dispersed counts": "dispersion",
    }
    for case, text in wanted.items():
        change, lags = CASES[case]
        expected, _ = single_fits(change(three_years), lags)
        assert any(text in message for _, message in expected), case


def test_intermittent_exposure_gives_the_single_fits_warnings(six_years_every_third_day):
    data = six_years_every_third_day
    lags = ["0", "3"]
    expected, error = single_fits(data, lags)
    assert error is None and any("leaves" in message for _, message in expected)
    assert outcome_of(lambda: compare_own_days(data, lags, **OPTIONS)) == (expected, None)
    assert outcome_of(lambda: compare_results(data, lags, **OPTIONS)) == (expected, None)


def test_intermittent_exposure_with_a_multi_day_window_fails_as_fit_does(six_years_every_third_day):
    data = six_years_every_third_day
    assert single_fits(data, ["0"])[1] is None
    _, expected = single_fits(data, ["0", "0-1"])
    assert expected is not None and "MovingAverage(first, last, min_count=1)" in expected[1]
    for call in (compare_own_days, compare_results):
        _, error = outcome_of(lambda call=call: call(data, ["0", "0-1"], **OPTIONS))
        assert error == expected


def test_too_few_days_fails_as_fit_does(three_years):
    data = three_years.iloc[:20].reset_index(drop=True)
    _, expected = single_fits(data, ["0"])
    assert expected is not None and "parameters" in expected[1]
    for call in (compare_own_days, compare_results):
        _, error = outcome_of(lambda call=call: call(data, ["0", "0-1"], **OPTIONS))
        assert error == expected


def test_the_first_structure_that_fails_gives_its_single_fit_error(six_years_every_third_day):
    data = six_years_every_third_day
    lags = ["0", "3", "0-1", "0-2"]  # single days fit; 0-1 is the first that cannot
    _, expected = single_fits(data, lags)
    assert expected is not None and "0-1" not in str(single_fits(data, ["0", "3"])[1])
    for call in (compare_own_days, compare_results):
        assert outcome_of(lambda call=call: call(data, lags, **OPTIONS))[1] == expected


def test_sweep_gives_the_warnings_of_the_single_fits(three_years):
    data = few_events(three_years)
    values = [4, 6]
    expected: set = set()
    for value in values:
        found, error = outcome_of(lambda v=value: airhealth.fit(data, lag="0-1", trend_df_per_year=v, **OPTIONS))
        assert error is None
        expected |= found
    assert expected
    got = outcome_of(lambda: sweep(data, "trend_df_per_year", values, lag="0-1", **OPTIONS))
    assert got == (expected, None)


def test_a_structure_the_shared_work_cannot_fit_takes_the_single_fit(three_years, monkeypatch):
    """When the shared path gives up (here: forced), the structure gets the single fit's answer."""
    data = over_dispersed(three_years)
    monkeypatch.setattr(compare_module, "fit_exposure_only", _always_fallback)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the dispersion warning (checked above)
        table = compare_own_days(data, ["0", "0-1"], **OPTIONS)
    for row, lag in zip(table.to_dict(orient="records"), ["0", "0-1"], strict=True):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            reference = airhealth.fit(data, lag=lag, **OPTIONS).to_dict()
        assert row["coef"] == pytest.approx(reference["coef"], rel=1e-12)
        assert row["se"] == pytest.approx(reference["se"], rel=1e-12)


def _always_fallback(base, E, rows, *, fallback, **kwargs):
    from airhealth.model.engine.grid_inference import exposure_block

    fit = fallback()
    return exposure_block(fit, fit.n_params - len(base.coef))


def test_an_unfittable_confounder_model_leaves_every_structure_to_its_single_fit(three_years, monkeypatch):
    from airhealth.errors import FitError

    def refuse(*args, **kwargs):
        raise FitError("confounder-only model cannot be fitted")

    monkeypatch.setattr(compare_module, "fit_confounders", refuse)
    data = over_dispersed(three_years)
    expected, _ = single_fits(data, ["0", "1"])
    warnings_seen, error = outcome_of(lambda: compare_own_days(data, ["0", "1"], **OPTIONS))
    assert error is None and warnings_seen == expected


def test_the_callers_frame_is_unchanged(three_years):
    data = few_events(three_years)
    before = data.copy()
    outcome_of(lambda: compare_own_days(data, ["0", "0-1"], **OPTIONS))
    pd.testing.assert_frame_equal(data, before)


def test_a_long_exposure_gap_gives_what_the_single_fits_give(three_years):
    """Ten months without exposure data leave time-spline columns without support on the days used.

    Whatever the single fit does with them (an error naming the columns, or dropping them as aliased),
    compare does the same: its rows equal the single fits, or it raises their error.
    """
    data = airhealth.load_sample()
    data = data[data["date"] < "2016-01-01"].reset_index(drop=True)
    data.loc[(data["date"] >= "2013-02-01") & (data["date"] < "2013-12-01"), "pm25"] = np.nan
    lags = ["0", "0-1"]
    expected, error = single_fits(data, lags)
    assert outcome_of(lambda: compare_own_days(data, lags, **OPTIONS)) == (expected, error)
    if error is None:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # the aliasing warning (checked above)
            table = compare_own_days(data, lags, **OPTIONS)
        for row, lag in zip(table.to_dict(orient="records"), lags, strict=True):
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                reference = airhealth.fit(data, lag=lag, **OPTIONS).to_dict()
            assert row["coef"] == pytest.approx(reference["coef"], rel=1e-8)
            assert row["se"] == pytest.approx(reference["se"], rel=1e-8)
