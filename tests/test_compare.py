"""Tests of the lag-structure comparison and the sensitivity sweep against single fits.

Reference: the single fit :func:`airhealth.fit` (the plain engine, itself checked against statsmodels and
base R elsewhere). Both paths converge to machine precision on the same data, so every reported number
(coef, se, rr and its interval, p-value, dispersion, QAIC) must agree to 1e-8 relative; n_days exactly.
A wrong row mask, a covariance at the wrong point or a stale dispersion would differ by > 1e-6.
"""

from __future__ import annotations

import io
import warnings
from concurrent.futures import ProcessPoolExecutor

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth._threads import worker_initializer
from airhealth.errors import DataWarning, SpecificationError
from airhealth.studies import compare as compare_module
from airhealth.studies.compare import COMPARE_COLUMNS, TABLE_COLUMNS, compare, compare_results
from airhealth.studies.sweep import sweep

RTOL = 1e-8
CHECKED = ["coef", "se", "rr", "rr_low", "rr_high", "p_value", "dispersion", "qaic"]
OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}
LAGS = ["0", "2", "0-1", "0-3", "1-3", "dl0-5"]


@pytest.fixture(scope="module")
def short_sample():
    """Six years of the Norhaven sample (keeps the tests fast), with a few extra missing exposure days."""
    data = airhealth.load_sample()
    data = data[data["date"] < "2016-01-01"].reset_index(drop=True)
    data.loc[[100, 101, 500, 1700], "pm25"] = np.nan
    return data


def single(data, lag, **options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return airhealth.fit(data, lag=lag, **{**OPTIONS, **options}).to_dict()


def assert_row_equals(row, reference):
    for name in CHECKED:
        assert row[name] == pytest.approx(reference[name], rel=RTOL), name
    assert row["n_days"] == reference["n_days"]
    assert row["lag"] == reference["lag"]


def test_compare_rows_equal_single_fits(short_sample, monkeypatch):
    calls = []
    original = compare_module.fit_design
    monkeypatch.setattr(compare_module, "fit_design", lambda *a, **k: calls.append(1) or original(*a, **k))
    with pytest.warns(DataWarning, match="QAIC values .* are not comparable"):
        table = compare(short_sample, LAGS, common_days=False, **OPTIONS)
    assert list(table.columns) == TABLE_COLUMNS and list(table["lag"]) == LAGS
    assert calls == []  # every structure took the shared-work path
    for row, lag in zip(table.to_dict(orient="records"), LAGS, strict=True):
        assert_row_equals(row, single(short_sample, lag))
    assert table["n_days"].nunique() > 1  # deeper lags lose days: the masks differ per structure


def test_compare_results_equal_single_fits(short_sample):
    results = compare_results(short_sample, ["1", "0-2", "dl0-5"], **OPTIONS)
    for result, lag in zip(results, ["1", "0-2", "dl0-5"], strict=True):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            reference = airhealth.fit(short_sample, lag=lag, **OPTIONS)
        assert_row_equals(result.to_dict(), reference.to_dict())
        np.testing.assert_allclose(result.std_err, reference.std_err, rtol=RTOL)  # full covariance
        np.testing.assert_allclose(result.fitted, reference.fitted, rtol=RTOL)
        pd.testing.assert_frame_equal(result.dropped, reference.dropped)


def test_common_days_fit_every_structure_on_the_same_days(short_sample):
    lags = ["0", "0-1", "0-5"]
    table = compare(short_sample, lags, common_days=True, **OPTIONS)
    assert table["n_days"].nunique() == 1
    # the common days are those of the deepest structure here (its lag window contains the others')
    deepest = compare_results(short_sample, ["0-5"], **OPTIONS)[0]
    restricted = short_sample.copy()
    keep = restricted["date"].isin(deepest.observed.index)
    restricted.loc[~keep, "deaths_all"] = np.nan  # the single fit then uses exactly the common days
    for row, lag in zip(table.to_dict(orient="records"), lags, strict=True):
        assert_row_equals(row, single(restricted, lag))
    results = compare_results(short_sample, lags, common_days=True, **OPTIONS)
    assert {r.n_days for r in results} == {int(table["n_days"].iloc[0])}
    assert (results[0].dropped["reason"] == compare_module.NOT_COMMON).sum() > 0
    for result, row in zip(results, table.to_dict(orient="records"), strict=True):
        assert result.to_dict()["coef"] == pytest.approx(row["coef"], rel=RTOL)


def test_negative_binomial_uses_the_plain_path_and_equals_single_fits(short_sample):
    with pytest.warns(DataWarning, match="different days"):
        table = compare(short_sample, ["0", "0-1"], family="negbin", common_days=False, **OPTIONS)
    for row, lag in zip(table.to_dict(orient="records"), ["0", "0-1"], strict=True):
        assert_row_equals(row, single(short_sample, lag, family="negbin"))


def test_compare_rejects_a_bare_string_and_an_empty_list(short_sample):
    with pytest.raises(SpecificationError, match="list of lag structures"):
        compare(short_sample, "0-1", **OPTIONS)
    with pytest.raises(SpecificationError, match="list of lag structures"):
        compare(short_sample, [], **OPTIONS)


def test_compare_shows_progress(short_sample, monkeypatch):
    stream = io.StringIO()
    real = compare_module.progress
    monkeypatch.setattr(compare_module, "progress", lambda *a, **k: real(*a, **{**k, "stream": stream}))
    compare(short_sample, ["0", "1"], show_progress=True, **OPTIONS)
    assert "lag structures 2/2" in stream.getvalue()
    stream.truncate(0)
    compare(short_sample, ["0", "1"], **OPTIONS)
    assert stream.getvalue() == ""


def test_sweep_rows_equal_single_fits(short_sample):
    values = [4, 7, 10]
    table = sweep(short_sample, "trend_df_per_year", values, lag="0-1", **OPTIONS)
    assert list(table["trend_df_per_year"]) == values
    assert list(table.columns) == ["trend_df_per_year", *COMPARE_COLUMNS]
    for row, value in zip(table.to_dict(orient="records"), values, strict=True):
        assert_row_equals(row, single(short_sample, "0-1", trend_df_per_year=value))
    assert table["coef"].nunique() == 3  # the confounder model really changed


def test_sweep_warm_start_when_the_columns_agree(short_sample):
    table = sweep(short_sample, "tol", [1e-8, 1e-10, 1e-12], lag="0", **OPTIONS)
    reference = single(short_sample, "0", tol=1e-12)
    assert table["coef"].iloc[-1] == pytest.approx(reference["coef"], rel=RTOL)


def test_sweep_rejects_bad_options(short_sample):
    with pytest.raises(SpecificationError, match="unknown model option 'trend'"):
        sweep(short_sample, "trend", [4], **OPTIONS)
    with pytest.raises(SpecificationError, match="do not also pass"):
        sweep(short_sample, "trend_df_per_year", [4], trend_df_per_year=5, **OPTIONS)


def _compare_in_worker(data):
    from airhealth._threads import blas_threads

    return blas_threads(), compare(data, ["0", "0-1"], **OPTIONS)


def test_compare_inside_a_process_pool_worker(short_sample):
    data = short_sample[short_sample["date"] < "2013-01-01"]
    with ProcessPoolExecutor(max_workers=1, initializer=worker_initializer) as pool:
        threads, table = pool.submit(_compare_in_worker, data).result(timeout=180)
    assert set(threads) == {1}
    pd.testing.assert_frame_equal(table, compare(data, ["0", "0-1"], **OPTIONS), rtol=1e-12)
