"""The time-stratified case-crossover (conditional Poisson with eliminated stratum intercepts).

Reference: statsmodels ``GLM`` (Seabold & Perktold 2010) with one indicator column per stratum on the same
design — the model of Armstrong, Gasparrini & Tobias (2014), fitted the slow way. R ``glm`` and
``survival::clogit`` are in tests/test_case_crossover_against_r.py.

Tolerances: statsmodels iterates to its deviance tolerance (set to 1e-13 here) and solves by a
pseudo-inverse; both sides then agree to ~1e-10; 1e-8 relative leaves room for that and would catch any error
of formula (a wrong residual df or a missed weight is > 1e-4). Invariance checks (strata that carry no
information left in or out) compare airhealth with itself: 1e-10 relative (rounding only).
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import airhealth
from airhealth._threads import single_threaded_blas
from airhealth.errors import DataError, FitError, SpecificationError
from airhealth.model.bases.strata import NO_EVENTS, SINGLE_DAY, stratum_codes
from airhealth.model.design import build_design, model_frame
from airhealth.model.engine.irls import fit_glm
from airhealth.model.spec import ModelSpec

RTOL = 1e-8


@pytest.fixture(scope="module")
def one_year(_sample_once):
    return _sample_once[_sample_once["date"] < "2011-01-01"].reset_index(drop=True)


@pytest.fixture(scope="module")
def three_years(_sample_once):
    return _sample_once[_sample_once["date"] < "2013-01-01"].reset_index(drop=True)


def indicators(codes: np.ndarray) -> np.ndarray:
    out = np.zeros((codes.size, codes.max() + 1))
    out[np.arange(codes.size), codes] = 1.0
    return out


def statsmodels_fit(design, family: str):
    X = np.hstack([design.matrix, indicators(design.strata.codes)])
    model = sm.GLM(design.response, X, family=sm.families.Poisson())
    with single_threaded_blas():  # (speed only: many BLAS threads on a small matrix are slow on a busy machine)
        return model.fit(scale="X2" if family == "quasipoisson" else 1.0, tol=1e-13, maxiter=100, wls_method="lstsq")


@pytest.mark.parametrize(("lag", "overdispersion"), [("0-1", True), ("dl0-3", False)])
def test_case_crossover_equals_statsmodels_glm_with_indicator_columns(one_year, lag, overdispersion):
    options = dict(temperature="temperature", humidity="humidity", design="case-crossover")
    result = airhealth.fit(one_year, "deaths_all", "pm25", lag=lag, overdispersion=overdispersion, **options)
    spec = ModelSpec.from_options(outcome="deaths_all", exposure="pm25", lag=lag, **options)
    design = build_design(model_frame(one_year, spec), spec)
    reference = statsmodels_fit(design, "quasipoisson" if overdispersion else "poisson")
    p = design.matrix.shape[1]
    np.testing.assert_allclose(result.coef.to_numpy(), reference.params[:p], rtol=RTOL, atol=1e-9 * reference.bse.min())
    np.testing.assert_allclose(result.std_err.to_numpy(), reference.bse[:p], rtol=RTOL)
    assert result.df_resid == reference.df_resid
    assert result.dispersion == pytest.approx(reference.scale if overdispersion else 1.0, rel=RTOL)
    assert result.deviance == pytest.approx(reference.deviance, rel=RTOL)
    np.testing.assert_allclose(result.fitted.to_numpy(), reference.fittedvalues, rtol=RTOL)


def test_engine_strata_with_offset_and_weights_equal_statsmodels_indicator_glm():
    rng = np.random.default_rng(7)
    k = 90
    codes = np.repeat(np.arange(k), rng.integers(3, 10, k))
    n = codes.size
    X = rng.normal(size=(n, 3))
    offset = rng.normal(0, 0.3, n)
    weights = rng.integers(1, 4, n).astype(float)
    y = rng.poisson(np.exp(3 + rng.normal(0, 0.5, k)[codes] + X @ [0.2, -0.1, 0.05] + offset)).astype(float)
    ours = fit_glm(X, y, family="quasipoisson", offset=offset, weights=weights, strata=codes)
    full = np.hstack([X, indicators(codes)])
    ref = sm.GLM(y, full, family=sm.families.Poisson(), offset=offset, freq_weights=weights)
    with single_threaded_blas():
        ref = ref.fit(scale="X2", tol=1e-13, maxiter=100)
    np.testing.assert_allclose(ours.coef, ref.params[:3], rtol=RTOL)
    np.testing.assert_allclose(ours.std_err, ref.bse[:3], rtol=RTOL)
    assert ours.df_resid == ref.df_resid and ours.n_strata == k
    assert ours.dispersion == pytest.approx(ref.scale, rel=RTOL)


def test_strata_are_year_month_and_day_of_week():
    # the partition checked against an independent grouping by pandas (the definition of Janes et al. 2005)
    calendar = pd.date_range("2019-12-01", "2021-03-31")
    groups = pd.DataFrame({"y": calendar.year, "m": calendar.month, "d": calendar.strftime("%A")})
    expected = groups.groupby(["y", "m", "d"]).ngroup().to_numpy()
    ours = np.unique(stratum_codes(calendar), return_inverse=True)[1].reshape(-1)
    assert pd.crosstab(ours, expected).astype(bool).sum(axis=1).eq(1).all()  # same partition
    assert np.unique(ours).size == np.unique(expected).size
    assert np.bincount(ours).min() == 4 and np.bincount(ours).max() == 5


def test_time_series_fit_unchanged_by_the_new_options(three_years):
    plain = airhealth.fit(three_years, "deaths_all", "pm25", temperature="temperature")
    explicit = airhealth.fit(three_years, "deaths_all", "pm25", temperature="temperature", design="time-series")
    assert plain.exposure_coef == explicit.exposure_coef
    assert plain.to_dict()["design"] == "time-series" and "n_strata" not in plain.to_dict()


# ------------------------------------------------------------------------- strata that carry nothing
def _stratum_days(data: pd.DataFrame, year: int, month: int, weekday: int) -> pd.Series:
    d = data["date"]
    return (d.dt.year == year) & (d.dt.month == month) & (d.dt.day_of_week == weekday)


def test_strata_without_events_are_dropped_counted_and_change_nothing(three_years):
    data = three_years.copy()
    data["deaths_all"] = data["deaths_all"] // 12  # small counts, so some strata have no events
    empty = _stratum_days(data, 2011, 3, 2)
    data.loc[empty, "deaths_all"] = 0
    result = airhealth.fit(data, "deaths_all", "pm25", design="case-crossover")
    record = result.to_dict()
    assert record["n_strata_without_events"] >= 1
    dropped = result.dropped
    gone = dropped.loc[dropped["reason"] == NO_EVENTS, "date"]
    assert set(data.loc[empty, "date"]) <= set(gone)
    # those days contribute nothing: leaving their outcome out gives the same fit (and the same dispersion)
    blanked = data.copy()
    blanked.loc[blanked["date"].isin(gone), "deaths_all"] = np.nan
    again = airhealth.fit(blanked, "deaths_all", "pm25", design="case-crossover")
    assert again.exposure_coef == pytest.approx(result.exposure_coef, rel=1e-10)
    assert again.exposure_se == pytest.approx(result.exposure_se, rel=1e-10)
    assert again.n_days == result.n_days and again.to_dict()["n_strata"] == record["n_strata"]


def test_strata_left_with_one_usable_day_are_dropped_and_counted(three_years):
    data = three_years.copy()
    stratum = _stratum_days(data, 2011, 6, 0)
    first = data.index[stratum][0]
    data.loc[stratum & (data.index != first), "pm25"] = np.nan
    result = airhealth.fit(data, "deaths_all", "pm25", lag="0", design="case-crossover")
    assert result.to_dict()["n_strata_single_day"] >= 1
    reasons = result.dropped.set_index("date")["reason"]
    assert reasons[data.loc[first, "date"]] == SINGLE_DAY
    blanked = data.copy()
    blanked.loc[first, "pm25"] = np.nan
    again = airhealth.fit(blanked, "deaths_all", "pm25", lag="0", design="case-crossover")
    assert again.exposure_coef == pytest.approx(result.exposure_coef, rel=1e-10)
    assert again.dispersion == pytest.approx(result.dispersion, rel=1e-10)


def test_no_stratum_with_events_on_two_days_is_a_clear_error(three_years):
    data = three_years.copy()
    codes = stratum_codes(pd.DatetimeIndex(data["date"]))
    first_of_stratum = ~pd.Series(codes).duplicated().to_numpy()
    data.loc[~first_of_stratum, "pm25"] = np.nan  # one exposure day per stratum
    with pytest.raises(DataError) as err:
        airhealth.fit(data, "deaths_all", "pm25", lag="0", design="case-crossover")
    message = str(err.value)
    assert "no case-crossover stratum" in message and "'deaths_all'" in message
    assert "(2010-01-01 to 2012-12-07): 0 strata have no events and 250 have a single usable day" in message
    assert "time-series design" in message


# ------------------------------------------------------------------------------------ bad options
def test_misspelled_design_names_the_valid_designs(three_years):
    with pytest.raises(SpecificationError, match="design='case-crosover' is not a valid choice; use one of "):
        airhealth.fit(three_years, "deaths_all", "pm25", design="case-crosover")


@pytest.mark.parametrize(
    ("option", "shown"),
    [
        ({"trend_df_per_year": 4}, "trend_df_per_year=4"),
        ({"seasonality": "fourier"}, "seasonality='fourier'"),
        ({"day_of_week": False}, "day_of_week=False"),
    ],
)
def test_time_spline_options_with_case_crossover_are_refused(three_years, option, shown):
    with pytest.raises(SpecificationError) as err:
        airhealth.fit(three_years, "deaths_all", "pm25", design="case-crossover", **option)
    assert str(err.value).startswith(f"{shown} does not apply to design='case-crossover'")
    assert "Remove the option, or use design='time-series'" in str(err.value)


@pytest.mark.parametrize(
    ("option", "expected"),
    [
        ({"family": "negbin"}, "not family='negbin'"),
        ({"interval": "hac"}, "interval='hac' is not available with design='case-crossover'"),
        ({"overdispersion": "off"}, "overdispersion must be True or False, got 'off'"),
        # was an internal "strata has shape ... but the design matrix has ... rows" after the first fit
        ({"residual_lags": 2}, "residual_lags=2 is not available with design='case-crossover'; leave it at 0"),
    ],
)
def test_options_the_case_crossover_cannot_honour_are_refused(three_years, option, expected):
    with pytest.raises(SpecificationError, match=expected):
        airhealth.fit(three_years, "deaths_all", "pm25", design="case-crossover", **option)


def test_overdispersion_false_is_plain_poisson_and_conflicts_with_negbin(three_years):
    spec = ModelSpec(outcome="deaths_all", exposure="pm25", overdispersion=False)
    assert spec.family == "poisson"
    with pytest.raises(SpecificationError, match="family='negbin' models over-dispersion; choose one"):
        ModelSpec(outcome="deaths_all", exposure="pm25", family="negbin", overdispersion=False)


def test_a_confounder_constant_within_strata_is_named(three_years):
    data = three_years.assign(year=three_years["date"].dt.year.astype(float))
    with pytest.raises(FitError, match="'year' is constant within every stratum"):
        airhealth.fit(data, "deaths_all", "pm25", confounders=["year"], design="case-crossover")


def test_compare_fits_each_structure_as_its_single_fit(three_years):
    options = dict(outcome="deaths_all", exposure="pm25", temperature="temperature", design="case-crossover")
    table = airhealth.compare(three_years, ["0", "dl0-2"], common_days=False, **options)
    for lag, row in zip(["0", "dl0-2"], table.itertuples(), strict=True):
        single = airhealth.fit(three_years, lag=lag, **options)
        assert row.coef == pytest.approx(single.exposure_coef, rel=1e-12)
        assert row.se == pytest.approx(single.exposure_se, rel=1e-12)


def test_compare_on_common_days_refits_the_strata_on_those_days(three_years):
    """With common days (the default) each row equals the single fit on the data with the outcome kept only on
    the days every structure can use; the strata are formed from those days."""
    options = dict(outcome="deaths_all", exposure="pm25", temperature="temperature", design="case-crossover")
    table = airhealth.compare(three_years, ["0", "dl0-2"], **options)
    deep = airhealth.fit(three_years, lag="dl0-2", **options)
    used = set(pd.DatetimeIndex(deep.fitted.index))
    shallow = airhealth.fit(three_years, lag="0", **options)
    common = used & set(pd.DatetimeIndex(shallow.fitted.index))
    blanked = three_years.assign(deaths_all=three_years["deaths_all"].where(three_years["date"].isin(common)))
    for lag, row in zip(["0", "dl0-2"], table.itertuples(), strict=True):
        single = airhealth.fit(blanked, lag=lag, **options)
        assert row.n_days == single.n_days
        assert row.coef == pytest.approx(single.exposure_coef, rel=1e-10)
        assert row.se == pytest.approx(single.exposure_se, rel=1e-10)
    assert table["n_days"].nunique() == 1


def test_fit_does_not_change_the_callers_data(three_years):
    data = three_years.copy()
    before = data.copy(deep=True)
    airhealth.fit(data, "deaths_all", "pm25", design="case-crossover")
    pd.testing.assert_frame_equal(data, before)


def test_diagnose_refuses_a_case_crossover_fit(three_years):
    result = airhealth.fit(three_years, "deaths_all", "pm25", design="case-crossover")
    with pytest.raises(SpecificationError, match="diagnose checks time-series fits; this is a case-crossover fit"):
        airhealth.diagnose(result)


def test_case_crossover_result_pickles_with_its_strata_and_they_are_read_only(three_years):
    import pickle

    result = airhealth.fit(three_years, "deaths_all", "pm25", design="case-crossover")
    again = pickle.loads(pickle.dumps(result))
    assert again.to_dict() == result.to_dict()
    with pytest.raises(TypeError):
        result.strata["n_strata"] = 0


def test_engine_refuses_strata_without_events_and_negbin_with_strata():
    X = np.column_stack([np.arange(8.0), np.arange(8.0) ** 0.5])
    y = np.array([0.0, 0, 0, 0, 3, 5, 2, 4])
    codes = np.array([0, 0, 0, 0, 1, 1, 1, 1])
    with pytest.raises(FitError, match=re.escape("1 strata have no events (e.g. the stratum of rows [0, 1, 2])")):
        fit_glm(X, y, family="poisson", strata=codes)
    with pytest.raises(FitError, match="apply to Poisson and quasi-Poisson fits only"):
        fit_glm(X, y + 1, family="negbin", strata=codes)
    with pytest.raises(FitError, match=re.escape("strata has shape (7,) but the design matrix has 8 rows")):
        fit_glm(X, y + 1, family="poisson", strata=codes[:7])


def test_notebook_display_names_the_design(three_years):
    result = airhealth.fit(three_years, "deaths_all", "pm25", design="case-crossover")
    assert "time-stratified case-crossover, 252 strata" in result._repr_html_()


def test_modifier_main_effect_absorbed_by_the_strata_is_left_out_as_aliased(three_years):
    # review defect: case-crossover with modifier="season" raised "constant within every stratum". Reference:
    # statsmodels GLM (Poisson, Pearson X2 scale) on indicators of year x month x day of week built here, the
    # warm-season main effect kept (rank deficient: lstsq gives the identified coefficients, as R glm gives
    # NA for the aliased one), pm25 x season built here; temperature columns from airhealth's design (its
    # splines are checked against R elsewhere). Same maths: RTOL.
    data = three_years.assign(season=airhealth.season_column(three_years["date"]))
    options = dict(lag="0", temperature="temperature", modifier="season", design="case-crossover")
    result = airhealth.fit(data, "deaths_all", "pm25", **options)
    assert result.aliased == ("season[warm]",)
    assert any("constant within every case-crossover stratum" in n for n in result.notes)
    spec = ModelSpec.from_options(outcome="deaths_all", exposure="pm25", **options)
    design = build_design(model_frame(data, spec), spec)
    used = data.loc[design.used]
    dates = pd.DatetimeIndex(used["date"])
    stratum = pd.factorize(pd.Series(list(zip(dates.year, dates.month, dates.day_of_week, strict=True))))[0]
    warm = (used["season"] == "warm").to_numpy(float)
    pm = used["pm25"].to_numpy(float)
    temperature = design.matrix[:, [i for i, n in enumerate(design.column_names) if n.startswith("spline(")]]
    X = np.column_stack([temperature, warm, pm * (1 - warm), pm * warm, indicators(stratum)])
    model = sm.GLM(used["deaths_all"].to_numpy(float), X, family=sm.families.Poisson())
    with single_threaded_blas():
        reference = model.fit(scale="X2", tol=1e-13, maxiter=100, wls_method="lstsq")
    m = temperature.shape[1]
    groups = result.effects_by_group(per=1)
    np.testing.assert_allclose(groups["coef"], reference.params[m + 1 : m + 3], rtol=RTOL)
    assert result.dispersion == pytest.approx(reference.scale, rel=RTOL) and result.df_resid == reference.df_resid
    # standard errors from the full-rank fit without the aliased column (the rank-deficient fit's pinv
    # covariance carries ~2e-7 relative rounding from its singular-value cut-off)
    full_rank = sm.GLM(model.endog, np.delete(X, m, axis=1), family=sm.families.Poisson())
    with single_threaded_blas():
        reduced = full_rank.fit(scale="X2", tol=1e-13, maxiter=100, wls_method="lstsq")
    np.testing.assert_allclose(groups["se"], reduced.bse[m : m + 2], rtol=RTOL)
    assert result.deviance == pytest.approx(reference.deviance, rel=RTOL)


def test_a_confounder_the_user_named_constant_within_strata_is_still_an_error(three_years):
    data = three_years.assign(month_code=pd.DatetimeIndex(three_years["date"]).month.astype(float))
    with pytest.raises(FitError, match=r"'month_code' is constant within every stratum"):
        airhealth.fit(data, "deaths_all", "pm25", lag="0", confounders=["month_code"], design="case-crossover")
