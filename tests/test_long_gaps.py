"""A year-long exposure gap in the middle of a series fits as base R ``glm`` fits it (aliased columns).

Source: base R ``glm`` / ``glm.fit`` with ``splines::ns`` (R Core Team, R: A Language and Environment for
Statistical Computing). ``tests/reference/long_gap_reference.R`` fits the model on the same calendar (an
invented city from ``tests/reference/make_long_gap_input.py``: 2012-2016, no exposure in 2014) with the
spline bases built on the whole calendar; glm reports the time-spline columns inside the gap as aliased
(coefficient NA) and fits the rest. The numbers are frozen in ``tests/reference/long_gap_reference.json``
and, when Rscript exists, the script is also run live.

Tolerances
----------
* Exposure coefficient: 1e-8 relative. Both programs converge the deviance to 1e-10 (airhealth) /
  1e-12 (R) relative, which leaves the coefficient within ~1e-10 of the optimum; 1e-8 leaves room for
  rounding in sums over ~1400 days while any modelling difference (a column kept or dropped differently,
  a knot moved, one day shifted) changes it in the 3rd-4th digit.
* Standard error and dispersion against the values R recomputes at its final fitted means: 1e-6
  relative (the same formula at the same optimum; summary.glm's own SE uses the weights from the start of
  its last iteration, ~1e-8 away, so 1e-6 covers both while catching any real difference).
* Deviance and QAIC: 1e-9 relative (the same formula at the same optimum).
* Days used, residual df, number of coefficients and the aliased columns: exact.
"""

from __future__ import annotations

import re
import warnings

import numpy as np
import pandas as pd
import pytest
from conftest import REFERENCE_DIR, frozen_reference, rel_diff, run_r_reference
from make_long_gap_input import GAP, gapped_city, write_input

import airhealth
from airhealth.errors import DataError, DataWarning
from airhealth.model.engine.aliasing import aliased_columns

R_SCRIPT = REFERENCE_DIR / "long_gap_reference.R"
FROZEN = frozen_reference("long_gap_reference")
NAMES = [f["name"] for f in FROZEN["fits"]]

REL_COEF = 1e-8
REL_SE = 1e-6
REL_FINAL = 1e-9


@pytest.fixture(scope="module")
def city() -> pd.DataFrame:
    return gapped_city()


def _fit(data: pd.DataFrame, ref: dict) -> airhealth.FitResult:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        return airhealth.fit(
            data, "deaths_all", "pm25", lag=ref["lag"], temperature="temperature", family=ref["family"]
        )


@pytest.fixture(scope="module")
def fits(city) -> dict[str, airhealth.FitResult]:
    return {ref["name"]: _fit(city, ref) for ref in FROZEN["fits"]}


@pytest.fixture(scope="module")
def live(rscript, tmp_path_factory) -> dict:
    tmp = tmp_path_factory.mktemp("long_gap_reference")
    csv = write_input(tmp / "long_gap_input.csv")
    return run_r_reference(rscript, R_SCRIPT, csv, out=tmp / "long_gap_reference.json")


def _our_name(r_name: str) -> str:
    """R's ``ns(time, df = 35)15`` is airhealth's ``spline(time)15``."""
    match = re.fullmatch(r"ns\(time, df = \d+\)(\d+)", r_name)
    assert match, f"unexpected aliased column in the R reference: {r_name}"
    return f"spline(time){match.group(1)}"


def check_against(result: airhealth.FitResult, ref: dict) -> None:
    assert result.aliased == tuple(_our_name(n) for n in ref["aliased"])
    assert not set(result.aliased) & set(result.coef.index)
    assert result.n_days == ref["n_used"]
    assert result.df_resid == ref["df_resid"]
    assert len(result.coef) == ref["n_coef"]
    assert rel_diff(result.exposure_coef, ref["coef"]) < REL_COEF
    assert rel_diff(result.exposure_se, ref["se"]) < REL_SE
    assert rel_diff(result.exposure_se, ref["se_final_mu"]) < REL_SE
    assert rel_diff(result.dispersion, ref["dispersion_final_mu"]) < REL_SE
    assert rel_diff(result.deviance, ref["deviance"]) < REL_FINAL
    assert rel_diff(result.qaic, ref["qaic"]) < REL_FINAL


def test_frozen_reference_describes_the_gapped_city(city):
    assert FROZEN["n_calendar_days"] == len(city)
    assert FROZEN["gap"] == list(GAP)
    assert city.loc[city["date"].between(*GAP), "pm25"].isna().all()
    assert all(f["aliased"] for f in FROZEN["fits"])  # the case is one where R aliases columns


@pytest.mark.parametrize("name", NAMES)
def test_long_gap_fit_matches_frozen_r_glm(fits, name):
    check_against(fits[name], next(f for f in FROZEN["fits"] if f["name"] == name))


@pytest.mark.needs_r
@pytest.mark.parametrize("name", NAMES)
def test_long_gap_fit_matches_live_r_glm(fits, live, name):
    check_against(fits[name], next(f for f in live["fits"] if f["name"] == name))


@pytest.mark.needs_r
def test_frozen_reference_is_up_to_date(live):
    assert [f["name"] for f in live["fits"]] == NAMES
    for new, old in zip(live["fits"], FROZEN["fits"], strict=True):
        for key in ("coef", "se", "dispersion", "deviance"):
            assert new[key] == pytest.approx(old[key], rel=1e-9), (new["name"], key)
        assert new["aliased"] == old["aliased"]


def test_aliased_columns_are_warned_about_with_the_gap_dates(city):
    with pytest.warns(DataWarning) as caught:
        result = airhealth.fit(city, "deaths_all", "pm25", temperature="temperature")
    message = next(str(w.message) for w in caught if "aliased" in str(w.message))
    assert "4 confounder column(s) cannot be estimated" in message
    assert "'spline(time)15', 'spline(time)16', 'spline(time)17', 'spline(time)18'" in message
    assert "from 2014-01-01 to 2015-01-01 (exposure missing: 365" in message
    assert result.notes == (message,)
    record = result.to_dict()
    assert record["aliased"] == ["spline(time)15", "spline(time)16", "spline(time)17", "spline(time)18"]
    assert record["notes"] == [message]


def test_a_complete_series_aliases_nothing(city):
    data = city.copy()
    data["pm25"] = data["pm25"].fillna(data["pm25"].median())
    with warnings.catch_warnings():
        warnings.simplefilter("error", DataWarning)
        result = airhealth.fit(data, "deaths_all", "pm25", temperature="temperature")
    assert result.aliased == () and result.notes == ()


def test_an_exposure_without_support_stays_an_error_naming_it(city):
    # An exposure that is zero on every day used cannot be dropped as aliased: it is the effect asked for.
    # (The preparation layer names it before the engine would.)
    data = city.assign(pm25=city["pm25"].where(city["date"].dt.year != 2013, 0.0))
    data = data[data["date"].dt.year.isin([2013, 2014])].reset_index(drop=True)
    with pytest.raises(DataError, match=r"exposure column 'pm25' never varies: it is 0 on all 365 days"):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DataWarning)
            airhealth.fit(data, "deaths_all", "pm25", temperature="temperature", trend_df_per_year=2)


@pytest.mark.parametrize("common_days", [False, True])
def test_compare_across_the_gap_equals_the_single_fits(city, common_days):
    options = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}
    with pytest.warns(DataWarning, match="aliased"):
        table = airhealth.compare(city, ["0", "0-1"], common_days=common_days, **options)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        results = airhealth.studies.compare.compare_results(city, ["0", "0-1"], common_days=common_days, **options)
        singles = [airhealth.fit(city, lag=lag, **options) for lag in ("0", "0-1")]
    for row, full, single in zip(table.itertuples(), results, singles, strict=True):
        assert full.aliased == ("spline(time)15", "spline(time)16", "spline(time)17", "spline(time)18")
        assert row.coef == pytest.approx(full.exposure_coef, rel=1e-12)
        if not common_days:  # the same days as the single fit: the same estimate (as compare promises)
            assert row.coef == pytest.approx(single.exposure_coef, rel=1e-8)
            assert row.se == pytest.approx(single.exposure_se, rel=1e-8)


def test_the_caller_data_is_not_changed(city):
    before = city.copy(deep=True)
    _fit(city, FROZEN["fits"][0])
    pd.testing.assert_frame_equal(city, before)


# --- the aliasing rule itself, against R's glm.fit behaviour on small matrices -----------------------------
def test_a_column_in_the_span_of_earlier_columns_is_aliased_not_the_earlier_ones():
    # R 4.2.2, checked live: glm(y ~ a + b + c, poisson) with c = a + 2 b reports c as NA (glm.fit's QR moves
    # the later column to the end); glm(y ~ c + a + b) reports b; glm(y ~ z + a + b) with z all zero reports
    # z. The rule is "in the span of the columns before it".
    rng = np.random.default_rng(11)
    a, b = rng.standard_normal(50), rng.standard_normal(50)
    one = np.ones(50)
    assert aliased_columns(np.column_stack([one, a, b, a + 2 * b])).tolist() == [3]
    assert aliased_columns(np.column_stack([one, a + 2 * b, a, b])).tolist() == [3]
    assert aliased_columns(np.column_stack([one, np.zeros(50), a, b])).tolist() == [1]


def test_aliasing_uses_r_default_relative_tolerance():
    # R's glm.fit passes min(1e-7, epsilon/1000) = 1e-11 (default epsilon 1e-8) to its QR: a column whose
    # part outside the earlier columns is 1e-13 of its norm is aliased, one with 1e-9 is kept.
    rng = np.random.default_rng(12)
    a, noise = rng.standard_normal(40), rng.standard_normal(40)
    noise -= noise.mean() + (noise @ (a - a.mean())) / ((a - a.mean()) @ (a - a.mean())) * (a - a.mean())
    one = np.ones(40)
    near = 2 * a + 1e-13 * np.linalg.norm(2 * a) * noise / np.linalg.norm(noise)
    kept = 2 * a + 1e-9 * np.linalg.norm(2 * a) * noise / np.linalg.norm(noise)
    assert aliased_columns(np.column_stack([one, a, near])).tolist() == [2]
    assert aliased_columns(np.column_stack([one, a, kept])).tolist() == []


def test_the_report_states_the_aliased_columns(city, tmp_path):
    import airhealth

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        path = airhealth.write_report(
            city, outcomes=["deaths_all"], exposures=["pm25"], lags=["0-1"], out=tmp_path / "report",
            temperature="temperature",
        )  # fmt: skip
    page = path.read_text(encoding="utf-8")
    assert "Note (deaths_all ~ pm25): 4 confounder column(s) cannot be estimated" in page
    assert "spline(time)15" in page and "from 2014-01-01 to 2015-01-01" in page
