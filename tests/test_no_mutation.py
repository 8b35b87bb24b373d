"""The caller's data frames are never modified, and the fit does not depend on incidental layout.

Invariances checked: row order of the input, column order, extra (unused or duplicated) columns, and
the order in which confounders are listed. Row and column permutations give bit-identical fits (the data
are sorted by date before anything is computed); reordering confounder terms permutes the design
columns, which changes floating-point rounding only (1e-9 relative).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth import Linear, Spline
from airhealth.errors import FitError, SpecificationError
from airhealth.prep.align import align_daily

BASE = {"outcome": "deaths_all", "exposure": "pm25", "lag": "0-1", "temperature": "temperature"}


@pytest.fixture
def messy(sample):
    """Four years of the sample, laid out awkwardly: text dates, shuffled rows, an odd index, a gap,
    an integer count column, a categorical column and attrs."""
    data = sample[sample["date"] < "2014-01-01"].copy()
    data = data.drop(index=data.index[200:203])  # a three-day gap
    data["date"] = data["date"].dt.strftime("%Y-%m-%d")
    data["season"] = pd.Categorical(np.where(data.index % 365 < 180, "first", "second"))
    data["flu"] = (np.sin(np.arange(len(data)) / 30.0) > 0.8).astype(float)
    data = data.sample(frac=1.0, random_state=3)
    data.index = pd.Index([f"r{i}" for i in range(len(data))], name="row")
    data.attrs["city"] = "Norhaven"
    return data


def _snapshot(frame: pd.DataFrame) -> pd.DataFrame:
    return frame.copy(deep=True)


def assert_unchanged(before: pd.DataFrame, after: pd.DataFrame) -> None:
    pd.testing.assert_frame_equal(
        after,
        before,
        check_exact=True,
        check_dtype=True,
        check_index_type=True,
        check_column_type=True,
        check_categorical=True,
        check_flags=True,
    )
    assert list(after.columns) == list(before.columns)
    assert after.index.equals(before.index) and after.index.name == before.index.name
    assert after.dtypes.equals(before.dtypes)
    assert after.attrs == before.attrs


def _quiet_fit(data, **options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", airhealth.DataWarning)  # the gap
        return airhealth.fit(data, **{**BASE, **options})


def test_fit_leaves_the_callers_frame_unchanged(messy):
    before = _snapshot(messy)
    result = _quiet_fit(messy, humidity="humidity", holidays="GB", confounders=["flu"])
    assert_unchanged(before, messy)
    # and the result does not share memory with the caller's frame
    observed = result.observed  # a copy (tests/test_read_only_results.py): writing to it is the caller's business
    observed.iloc[0] = -1
    assert_unchanged(before, messy)


def test_fit_with_each_family_and_seasonality_leaves_the_frame_unchanged(messy):
    before = _snapshot(messy)
    for options in ({"family": "poisson"}, {"family": "negbin"}, {"seasonality": "fourier"}, {"lag": "2"}):
        _quiet_fit(messy, **options)
        assert_unchanged(before, messy)


def test_failed_fit_leaves_the_frame_unchanged(messy):
    before = _snapshot(messy)
    with pytest.raises(airhealth.DataError):
        _quiet_fit(messy.assign(pm25=np.nan))  # assign makes a copy; the next one uses the frame itself
    with pytest.raises(airhealth.DataError):
        _quiet_fit(messy, exposure="pm2.5")
    assert_unchanged(before, messy)


def test_align_daily_leaves_its_tables_unchanged():
    tables = airhealth.load_sample_tables()
    tables["pollution"] = tables["pollution"].sample(frac=1.0, random_state=1)  # unsorted input
    tables["weather"]["date"] = tables["weather"]["date"].dt.strftime("%Y-%m-%d")  # text dates
    before = {k: _snapshot(v) for k, v in tables.items()}
    aligned = align_daily(tables["counts"], tables["pollution"], tables["weather"])
    for key in tables:
        assert_unchanged(before[key], tables[key])
    aligned.iloc[0, 1] = -999  # the result is a new frame
    for key in tables:
        assert_unchanged(before[key], tables[key])


def test_row_order_does_not_matter(messy):
    a = _quiet_fit(messy)
    b = _quiet_fit(messy.sort_values("date"))
    c = _quiet_fit(messy.iloc[::-1])
    for other in (b, c):
        assert other.exposure_coef == a.exposure_coef
        assert other.exposure_se == a.exposure_se
        assert other.dispersion == a.dispersion
        pd.testing.assert_frame_equal(other.dropped, a.dropped)


def test_column_order_and_extra_columns_do_not_matter(messy):
    a = _quiet_fit(messy)
    reordered = messy[list(reversed(messy.columns))]
    extra = messy.assign(pm25_copy=messy["pm25"], unrelated=np.arange(len(messy)), text="x")
    for data in (reordered, extra):
        b = _quiet_fit(data)
        assert (b.exposure_coef, b.exposure_se, b.dispersion) == (a.exposure_coef, a.exposure_se, a.dispersion)


def test_confounder_order_does_not_change_the_exposure_estimate(messy):
    terms = [Linear("flu"), Spline("humidity", df=3), airhealth.Categorical("season")]
    a = _quiet_fit(messy, confounders=terms)
    b = _quiet_fit(messy, confounders=terms[::-1])
    assert b.exposure_coef == pytest.approx(a.exposure_coef, rel=1e-9)
    assert b.exposure_se == pytest.approx(a.exposure_se, rel=1e-9)
    assert b.dispersion == pytest.approx(a.dispersion, rel=1e-9)
    # the confounders matter (so the comparison is not vacuous)
    assert abs(_quiet_fit(messy).exposure_coef - a.exposure_coef) > 1e-7


def test_a_confounder_listed_twice_is_an_error_not_a_different_answer(messy):
    with pytest.raises(SpecificationError, match=r"two model terms produce the column 'flu'; remove the repeated"):
        _quiet_fit(messy, confounders=["flu", "flu"])


def test_a_duplicated_confounder_column_is_a_singular_design(messy):
    # an identical copy under another name makes the design singular: a clear error naming both columns
    data = messy.assign(flu_again=messy["flu"])
    with pytest.raises(FitError, match=r"rank-deficient.*'flu(_again)?' is a linear combination of 'flu(_again)?'"):
        _quiet_fit(data, confounders=["flu", "flu_again"])
