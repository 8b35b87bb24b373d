"""Missing-value codes: declared codes become missing, text is named, common sentinels are refused.

Measured before these guards: three -999 days in the exposure moved RR per 10 µg/m³ from 1.0080 to 1.0009
without a word. Each case asserts the message names the column, the value, the number of days, the first
dates and the remedy (na_values=[...], --na-values), and that the caller's frame is unchanged.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import airhealth
from airhealth.errors import DataError, DispersionWarning, SpecificationError
from airhealth.model.spec import ModelSpec
from airhealth.prep.missing_codes import FAR_OUT, apply_na_values, find_missing_codes
from airhealth.studies.compare import compare

BASE = {"outcome": "deaths_all", "exposure": "pm25", "lag": "0-1", "temperature": "temperature"}
CODE_ROWS = [100, 400, 700]


def fit(data, **options):
    return airhealth.fit(data, **{**BASE, **options})


def with_codes(data, column="pm25", code=-999.0, rows=CODE_ROWS):
    out = data.copy()
    out.loc[rows, column] = code
    return out


def test_minus_999_in_the_exposure_is_named_with_dates_and_remedy(three_years):
    data = with_codes(three_years)
    before = data.copy()
    with pytest.raises(DataError) as err:
        fit(data)
    message = str(err.value)
    assert "column 'pm25' holds -999 on 3 day(s): 2010-04-11, 2011-02-05, 2011-12-02" in message
    assert "far outside its other values" in message
    assert "na_values=[-999]" in message and "--na-values -999" in message
    pd.testing.assert_frame_equal(data, before)  # the caller's frame is not modified


def test_declared_code_gives_exactly_the_fit_with_those_days_missing(three_years):
    coded = with_codes(three_years)
    blank = with_codes(three_years, code=np.nan)
    declared = fit(coded, na_values=[-999])
    reference = fit(blank)
    # the same days and the same arithmetic: equal to the last bit, not merely close
    assert declared.effect().rr == reference.effect().rr
    pd.testing.assert_series_equal(declared.coef, reference.coef, check_exact=True)
    # each missing day leaves out its own lag 0-1 window and the next day's: 3 codes, 6 days
    assert declared.n_days == reference.n_days == fit(three_years).n_days - 6


def test_code_given_as_text_matches_the_number(three_years):
    # the command line passes --na-values -999 as text
    coded = with_codes(three_years)
    assert fit(coded, na_values=["-999"]).effect().rr == fit(coded, na_values=[-999.0]).effect().rr


def test_several_codes_in_several_columns_are_named_in_one_message(three_years):
    data = with_codes(with_codes(three_years), column="temperature", code=-99.0, rows=[10, 20])
    data.loc[[30], "pm25"] = 9999.0
    with pytest.raises(DataError) as err:
        fit(data)
    message = str(err.value)
    assert "column 'pm25' holds -999 on 3 day(s)" in message
    assert "column 'pm25' holds 9999 on 1 day(s): 2010-01-31" in message
    assert "column 'temperature' holds -99 on 2 day(s): 2010-01-11, 2010-01-21" in message
    assert "na_values=[-999, -99, 9999]" in message and "--na-values -999 -99 9999" in message


def test_code_in_the_outcome_is_named_before_the_negative_count_error(three_years):
    data = with_codes(three_years, column="deaths_all", code=-999, rows=[50, 51])
    with pytest.raises(DataError, match=r"column 'deaths_all' holds -999 on 2 day\(s\): 2010-02-20, 2010-02-21.*"):
        fit(data)
    assert fit(data, na_values=[-999]).n_days == fit(three_years).n_days - 2


def test_a_count_equal_to_a_positive_code_is_a_real_count(three_years):
    # 999 deaths on ONE day is extreme but possible (a disaster): a count-like code must repeat to be flagged
    data = three_years.copy()
    data.loc[200, "deaths_all"] = 999
    with pytest.warns(DispersionWarning):  # the one outlier inflates the dispersion, as it should
        assert fit(data).n_days == fit(three_years).n_days


def test_a_small_negative_concentration_is_not_a_code(three_years):
    # -1 is a common code, but inside the far-out fences of a PM2.5 series it is instrument noise near zero
    data = with_codes(three_years, code=-1.0)
    assert fit(data).n_days == fit(three_years).n_days


def test_far_out_rule_matches_tukey_fences_computed_with_scipy():
    # Tukey JW (1977), Exploratory Data Analysis: "far out" beyond Q1 - 3 IQR or Q3 + 3 IQR; scipy.stats.iqr
    # and numpy percentiles (linear interpolation, the method used here) give the fences independently.
    rng = np.random.default_rng(8)
    values = rng.gamma(4.0, 5.0, 500)
    q1, q3 = np.percentile(values, [25, 75])
    assert stats.iqr(values) == pytest.approx(q3 - q1, rel=1e-12)  # same quartiles, float rounding only
    low_fence = q1 - FAR_OUT * stats.iqr(values)
    dates = pd.date_range("2020-01-01", periods=501)
    for code, expected in [(-1.0, -1.0 < low_fence), (-99.0, True), (999.0, True)]:
        found = find_missing_codes(np.r_[values, code], "x", dates)
        assert bool(found) == expected, code
    assert low_fence < -1.0  # so -1 is kept for this series


def test_lod_text_is_named_with_dates_and_remedy(three_years):
    data = three_years.astype({"pm25": object})
    data.loc[[5, 9], "pm25"] = "<LOD"
    data.loc[12, "pm25"] = "see note"
    before = data.copy()
    with pytest.raises(DataError) as err:
        fit(data)
    message = str(err.value)
    assert "column 'pm25' must be numeric but holds text on 3 day(s): '<LOD', 'see note'" in message
    assert "on 2010-01-06, 2010-01-10, 2010-01-13" in message
    assert "na_values=['<LOD', 'see note']" in message and "--na-values" in message
    pd.testing.assert_frame_equal(data, before)


def test_declared_text_and_standard_missing_markers_become_missing(three_years):
    data = three_years.astype({"pm25": object})
    data.loc[[5, 9], "pm25"] = " <LOD "
    data.loc[12, "pm25"] = "NA"  # read as missing by pandas.read_csv by default, so here too
    blank = three_years.copy()
    blank.loc[[5, 9, 12], "pm25"] = np.nan
    assert fit(data, na_values=["<LOD"]).effect().rr == fit(blank).effect().rr


def test_numbers_stored_as_text_are_read_as_numbers(three_years):
    data = three_years.astype({"pm25": str, "deaths_all": str})
    assert fit(data).effect().rr == fit(three_years).effect().rr


def test_decimal_commas_are_pointed_out(three_years):
    data = three_years.astype({"pm25": object})
    data.loc[3, "pm25"] = "12,5"
    with pytest.raises(DataError, match=r"'12,5', on 2010-01-04.*decimal=','.*--decimal ,"):
        fit(data)


def test_apply_na_values_leaves_the_input_alone_and_other_columns_as_they_are():
    frame = pd.DataFrame({"a": [1.0, -999.0, 3.0], "b": [-999.0, 2.0, 3.0]})
    out = apply_na_values(frame, ["a"], [-999], pd.date_range("2020-01-01", periods=3))
    assert out["a"].isna().tolist() == [False, True, False]
    assert out["b"].tolist() == [-999.0, 2.0, 3.0]
    assert frame["a"].tolist() == [1.0, -999.0, 3.0]


@pytest.mark.parametrize(
    ("given", "message"),
    [
        ({"pm25": -999}, r"na_values must be a list"),
        ([True], r"na_values entry True is neither a number nor a non-empty text"),
        ([np.nan], r"na_values entry nan is not a finite number"),
        ([""], r"na_values entry '' is neither"),
    ],
)
def test_bad_na_values_are_refused(given, message):
    with pytest.raises(SpecificationError, match=message):
        ModelSpec(outcome="y", exposure="x", na_values=given)


def test_na_values_are_normalised():
    assert ModelSpec(outcome="y", exposure="x", na_values=-999).na_values == (-999,)
    assert ModelSpec(outcome="y", exposure="x", na_values=[" <LOD ", np.int64(-99)]).na_values == ("<LOD", -99)


def test_compare_gives_the_same_errors_and_honours_na_values(three_years):
    coded = with_codes(three_years)
    options = {k: v for k, v in BASE.items() if k != "lag"}
    with pytest.raises(DataError, match=r"column 'pm25' holds -999 on 3 day\(s\).*na_values=\[-999\]"):
        compare(coded, lags=["0", "0-1"], **options)
    table = compare(coded, lags=["0", "0-1"], na_values=[-999], **options)
    assert table["rr"].iloc[1] == pytest.approx(fit(coded, na_values=[-999]).effect().rr, rel=1e-9)  # grid path


def test_a_code_that_could_be_a_count_never_erases_outcome_days(three_years):
    # na_values=[0] declares 0 as "missing" in the exposure and weather columns; applied to the outcome it
    # would silently drop every day with no deaths. Only codes that cannot be counts reach count columns.
    data = three_years.assign(deaths_all=three_years["deaths_all"].where(three_years.index % 50 != 0, 0))
    data.loc[[10, 20], "deaths_all"] = -999
    cleaned = apply_na_values(
        data, ["deaths_all", "pm25"], [0, -999], pd.DatetimeIndex(data["date"]), counts=["deaths_all"]
    )
    zero_days = (data["deaths_all"] == 0).sum()
    assert zero_days > 0 and (cleaned["deaths_all"] == 0).sum() == zero_days
    assert cleaned["deaths_all"].isna().sum() == 2  # the -999 codes
    result = fit(data, na_values=[0, -999])
    assert (
        result.n_days
        == fit(data.assign(deaths_all=data["deaths_all"].where(data["deaths_all"] >= 0)), na_values=[0]).n_days
    )


def test_a_large_code_in_the_outcome_is_named_and_a_declared_one_applies(three_years):
    # Reviewed case: three days of 9999 deaths gave RR 0.80 (p = 7e-13) and `--na-values 9999` was ignored for
    # the outcome. A count-like code far outside the counts is now found, and applies once declared.
    data = with_codes(three_years, column="deaths_all", code=9999.0)
    with pytest.raises(DataError, match=r"column 'deaths_all' holds 9999 on 3 day\(s\): 2010-04-11"):
        fit(data)
    declared = fit(data, na_values=[9999])
    blank = fit(with_codes(three_years, column="deaths_all", code=np.nan))
    pd.testing.assert_series_equal(declared.coef, blank.coef, check_exact=True)


def test_a_declared_code_among_the_counts_is_left_as_a_count_with_a_warning(three_years):
    data = three_years.copy()
    data.loc[[5, 6], "deaths_all"] = 30  # within the usual counts
    with pytest.warns(UserWarning, match=r"na_values 30 not applied to the count column 'deaths_all'"):
        declared = fit(data, na_values=[30])
    assert declared.n_days == fit(data).n_days
