"""Every row of a lags x trend-df comparison equals the single fit of that model on the same days.

Reference: :func:`airhealth.fit` (the plain engine, itself checked against statsmodels and base R in
tests/test_fit_statsmodels.py and tests/test_against_r.py), one call per lag structure and df value. The
"same days" are found without compare: with common days, the intersection of the days each single fit uses
(the single fits are then repeated with the outcome blanked outside those days, which makes a single fit use
exactly them). Both paths converge to machine precision, so every number agrees to 1e-8 relative (a wrong
row mask, confounder block or dispersion would differ by > 1e-6); ``n_days`` and the dates exactly.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.studies import compare as compare_module
from airhealth.studies.compare import compare

RTOL = 1e-8  # both paths converge to machine precision (see the module docstring)
CHECKED = ["coef", "se", "rr", "rr_low", "rr_high", "p_value", "dispersion", "qaic"]
OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}
LAGS = ["0", "2", "0-3", "dl0-5"]
DFS = [4, 8.5]


@pytest.fixture(scope="module")
def four_years():
    """Four years of the Norhaven sample with scattered missing exposure days (so the lags lose different days)."""
    data = airhealth.load_sample()
    data = data[data["date"] < "2014-01-01"].reset_index(drop=True)
    data.loc[[40, 41, 300, 777, 1100], "pm25"] = np.nan
    return data


def quiet(call):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return call()


def single(data, lag, df, **options):
    return quiet(lambda: airhealth.fit(data, lag=lag, trend_df_per_year=df, **{**OPTIONS, **options}))


def common_days_of(data, lags):
    """The days every single fit uses (found from the single fits alone)."""
    days = [set(single(data, lag, DFS[0]).observed.index) for lag in lags]
    return pd.DatetimeIndex(sorted(set.intersection(*days)))


def on_days(data, days):
    """The data with the outcome blanked outside ``days``: a single fit then uses exactly those days."""
    out = data.copy()
    out.loc[~out["date"].isin(days), "deaths_all"] = np.nan
    return out


def assert_rows_equal_single_fits(table, data, **options):
    assert list(zip(table["lag"], table["trend_df_per_year"], strict=True)) == [(g, d) for g in LAGS for d in DFS]
    for row in table.to_dict(orient="records"):
        reference = single(data, row["lag"], row["trend_df_per_year"], **options)
        record = reference.to_dict()
        for name in CHECKED:
            assert row[name] == pytest.approx(record[name], rel=RTOL), (row["lag"], row["trend_df_per_year"], name)
        assert row["n_days"] == reference.n_days
        assert row["n_params"] == len(reference.coef)
        assert (row["first_day"], row["last_day"]) == (reference.observed.index[0], reference.observed.index[-1])


def test_each_row_on_common_days_equals_the_single_fit_on_those_days(four_years, monkeypatch):
    calls = []
    original = compare_module.fit_design
    monkeypatch.setattr(compare_module, "fit_design", lambda *a, **k: calls.append(1) or original(*a, **k))
    table = quiet(lambda: compare(four_years, LAGS, trend_df_per_year=DFS, **OPTIONS))
    assert calls == []  # every model took the shared-work path
    days = common_days_of(four_years, LAGS)
    assert set(table["n_days"]) == {len(days)} and set(table["days"]) == {"common"}
    assert_rows_equal_single_fits(table, on_days(four_years, days))
    assert table.groupby("lag")["coef"].nunique().eq(2).all()  # the df really changed the model


def test_each_row_on_its_own_days_equals_the_single_fit(four_years):
    with pytest.warns(airhealth.DataWarning, match="different days"):
        table = compare(four_years, LAGS, trend_df_per_year=DFS, common_days=False, **OPTIONS)
    assert set(table["days"]) == {"own"} and table["n_days"].nunique() > 1
    assert_rows_equal_single_fits(table, four_years)


def test_each_newey_west_row_equals_the_single_fit_on_the_common_days(four_years):
    table = quiet(lambda: compare(four_years, LAGS, trend_df_per_year=DFS, interval="hac", hac_lags=6, **OPTIONS))
    assert set(table["interval"]) == {"hac"} and set(table["hac_lags"]) == {6}
    data = on_days(four_years, common_days_of(four_years, LAGS))
    assert_rows_equal_single_fits(table, data, interval="hac", hac_lags=6)
    model_based = quiet(lambda: compare(four_years, LAGS, trend_df_per_year=DFS, **OPTIONS))
    np.testing.assert_allclose(table["coef"], model_based["coef"], rtol=RTOL)  # same estimates,
    assert not np.allclose(table["se"], model_based["se"], rtol=1e-3)  # other standard errors


def test_the_default_truncation_lag_follows_the_common_days(four_years):
    table = quiet(lambda: compare(four_years, ["0", "0-3"], interval="hac", **OPTIONS))
    data = on_days(four_years, common_days_of(four_years, ["0", "0-3"]))
    for row in table.to_dict(orient="records"):
        reference = single(data, row["lag"], 7.0, interval="hac")
        assert row["hac_lags"] == reference.hac_lags
        assert row["se"] == pytest.approx(reference.exposure_se, rel=RTOL)


def test_one_df_value_gives_one_row_per_lag_in_order(four_years):
    table = quiet(lambda: compare(four_years, ["0-1", "0"], trend_df_per_year=6, **OPTIONS))
    assert list(table["lag"]) == ["0-1", "0"] and list(table["trend_df_per_year"]) == [6, 6]


def test_the_callers_frame_is_unchanged(four_years):
    before = four_years.copy()
    quiet(lambda: compare(four_years, ["0", "0-1"], trend_df_per_year=[4, 6], **OPTIONS))
    pd.testing.assert_frame_equal(four_years, before)


def _always_fallback(base, E, rows, *, fallback, **kwargs):
    from airhealth.model.engine.grid_inference import exposure_block

    fit = fallback()
    return exposure_block(fit, fit.n_params - len(base.coef))


def test_a_model_the_shared_work_leaves_gets_its_single_fit_on_the_common_days(four_years, monkeypatch):
    monkeypatch.setattr(compare_module, "fit_exposure_only", _always_fallback)  # every model falls back
    table = quiet(lambda: compare(four_years, LAGS, trend_df_per_year=DFS, **OPTIONS))
    assert_rows_equal_single_fits(table, on_days(four_years, common_days_of(four_years, LAGS)))


def test_progress_counts_every_model(four_years, monkeypatch):
    import io

    stream = io.StringIO()
    real = compare_module.progress
    monkeypatch.setattr(compare_module, "progress", lambda *a, **k: real(*a, **{**k, "stream": stream}))
    quiet(lambda: compare(four_years, ["0", "1"], trend_df_per_year=[4, 6, 8], show_progress=True, **OPTIONS))
    assert "models 6/6" in stream.getvalue()
