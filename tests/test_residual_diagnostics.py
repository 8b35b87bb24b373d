"""Residuals, influence measures and residual autocorrelation equal R and statsmodels on the same model.

Sources: base R ``residuals.glm``, ``hatvalues``, ``cooks.distance``, ``rstandard``, ``acf``, ``pacf`` (R Core
Team, R: A Language and Environment for Statistical Computing) via ``tests/reference/diagnostics_reference.R``
on the complete simulated city of ``tests/reference/make_diagnostics_input.py`` (frozen in
``tests/reference/diagnostics_reference.json``; run live when Rscript exists); statsmodels
``tsa.stattools.acf`` / ``pacf(method="ldb")`` and ``WLS(...).rsquared`` on the residuals and design that
airhealth reports.

Tolerances
----------
* Residuals: 1e-9 absolute (values of order 1; both programs evaluate the same formula at the same optimum,
  converged to 1e-10 / 1e-12 on the deviance).
* Hat values, Cook's distances, standardized residuals: 1e-6 relative. R computes them with the IRLS weights
  from the start of its last iteration, ~1e-8 relative away from the weights at the final fitted means
  (the measured gap is 6e-8); 1e-6 catches any real difference (a wrong p or dispersion changes them by %).
* Autocorrelations against R and statsmodels on the same residuals: 1e-12 (same sums, rounding only).
"""

from __future__ import annotations

import pickle
import warnings

import numpy as np
import pandas as pd
import pytest
from conftest import REFERENCE_DIR, frozen_reference, run_r_reference
from make_diagnostics_input import complete_city, write_input
from statsmodels.regression.linear_model import WLS
from statsmodels.tsa.stattools import acf, pacf

import airhealth
from airhealth.errors import DataError, DataWarning, SpecificationError

FROZEN = frozen_reference("diagnostics_reference")
OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "lag": "0", "temperature": "temperature"}


@pytest.fixture(scope="module")
def city() -> pd.DataFrame:
    return complete_city()


@pytest.fixture(scope="module")
def result(city) -> airhealth.FitResult:
    return airhealth.fit(city, **OPTIONS)


@pytest.fixture(scope="module")
def checks(result) -> airhealth.Diagnostics:
    return airhealth.diagnose(result, max_lag=30)


@pytest.fixture(scope="module")
def live(rscript, tmp_path_factory) -> dict:
    folder = tmp_path_factory.mktemp("diagnostics_reference")
    data = write_input(folder / "input.csv")
    return run_r_reference(rscript, REFERENCE_DIR / "diagnostics_reference.R", data, out=folder / "out.json")


def check_against(result: airhealth.FitResult, checks: airhealth.Diagnostics, ref: dict) -> None:
    assert result.n_days == ref["n_used"]
    assert str(result.observed.index[0].date()) == ref["first_day"]
    assert str(result.observed.index[-1].date()) == ref["last_day"]
    assert len(result.coef) == ref["rank"]
    for kind in ("deviance", "pearson", "response"):
        np.testing.assert_allclose(result.residuals(kind).to_numpy(), ref[f"{kind}_residuals"], rtol=0, atol=1e-9)
    table = checks.influence
    np.testing.assert_allclose(table["leverage"], ref["hat_values"], rtol=1e-6)
    np.testing.assert_allclose(table["cooks_distance"], ref["cooks_distance"], rtol=1e-6)
    np.testing.assert_allclose(table["standardized_residual"], ref["standardized_residuals"], rtol=1e-6)
    acf_table = checks.autocorrelation
    np.testing.assert_allclose(acf_table["acf"], ref["acf"], rtol=0, atol=1e-12)
    np.testing.assert_allclose(acf_table["pacf"], ref["pacf"], rtol=0, atol=1e-12)


def test_residuals_influence_and_autocorrelation_match_frozen_r(result, checks):
    check_against(result, checks, FROZEN)


@pytest.mark.needs_r
def test_residuals_influence_and_autocorrelation_match_live_r(result, checks, live):
    check_against(result, checks, live)


@pytest.mark.needs_r
def test_frozen_diagnostics_reference_is_up_to_date(live):
    for key in ("deviance_residuals", "hat_values", "cooks_distance", "acf", "pacf"):
        np.testing.assert_allclose(live[key], FROZEN[key], rtol=1e-9, atol=1e-15, err_msg=key)


def test_autocorrelations_equal_statsmodels_without_gaps(result, checks):
    residuals = result.residuals("deviance").to_numpy()
    table = checks.autocorrelation
    assert table["lag"].tolist() == list(range(1, 31))
    np.testing.assert_allclose(table["acf"], acf(residuals, nlags=30)[1:], rtol=0, atol=1e-12)
    np.testing.assert_allclose(table["pacf"], pacf(residuals, nlags=30, method="ldb")[1:], rtol=0, atol=1e-12)
    assert (table["n_pairs"] == result.n_days - table["lag"]).all()


def test_autocorrelation_across_gaps_pairs_only_days_both_used(city):
    gapped = city.copy()
    gapped.loc[100:104, "pm25"] = np.nan  # five days without exposure: a gap in the days used
    gapped.loc[500, "pm25"] = np.nan
    result = airhealth.fit(gapped, **OPTIONS)
    table = airhealth.diagnose(result, max_lag=10).autocorrelation
    residuals = result.residuals("deviance")
    on_calendar = residuals.reindex(pd.date_range(residuals.index[0], residuals.index[-1])).to_numpy()
    # statsmodels' "conservative" missing-value rule: pairs with both days present, denominator over days present
    expected = acf(on_calendar, nlags=10, missing="conservative")[1:]
    np.testing.assert_allclose(table["acf"], expected, rtol=0, atol=1e-12)
    naive = acf(residuals.to_numpy(), nlags=10)[1:]  # rows treated as consecutive days
    assert np.max(np.abs(table["acf"].to_numpy() - naive)) > 1e-4
    # 1093 consecutive days give 1092 pairs at lag 1; the missing day removes 2, the 5-day gap 6 (4 inside, 2 edges)
    assert result.n_days == 1093 - 6
    assert table.loc[0, "n_pairs"] == 1092 - 2 - 6
    assert table.loc[0, "n_pairs"] == int(np.sum(np.isfinite(on_calendar[1:]) & np.isfinite(on_calendar[:-1])))


def test_residuals_are_dated_copies_and_a_bad_kind_is_named(result):
    residuals = result.residuals()
    assert residuals.index.equals(result.fitted.index)
    residuals.iloc[0] = 99.0
    assert result.residuals().iloc[0] != 99.0
    np.testing.assert_allclose(
        result.residuals("response").to_numpy(), (result.observed - result.fitted).to_numpy(), rtol=0, atol=1e-12
    )
    with pytest.raises(SpecificationError, match=r"kind='raw' is not a valid choice; use one of 'deviance', 'pearson'"):
        result.residuals("raw")


def test_negative_binomial_pearson_residuals_use_its_variance(city):
    result = airhealth.fit(city, family="negbin", **OPTIONS)
    mu, y = result.fitted.to_numpy(), result.observed.to_numpy()
    # Pearson residual (y - mu) / sqrt(mu + mu^2 / theta) (McCullagh & Nelder 1989, section 2.4; NB2 variance)
    expected = (y - mu) / np.sqrt(mu + mu**2 / result.theta)
    np.testing.assert_allclose(result.residuals("pearson").to_numpy(), expected, rtol=1e-12)


def test_exposure_variance_inflation_equals_weighted_r_squared(result, checks):
    design = result.design_matrix
    weights = result.working_weights()
    confounders = design.drop(columns=list(result.exposure_columns))
    r2 = WLS(design[result.exposure_columns[0]], confounders, weights=weights).fit().rsquared
    # VIF = 1 / (1 - R^2) of the exposure on the confounders, IRLS-weighted (Fox & Monette 1992)
    assert checks.exposure_vif == pytest.approx(1.0 / (1.0 - r2), rel=1e-9)


def test_exposure_close_to_a_smooth_of_time_warns_of_concurvity(city):
    smooth = city.assign(pm25=20 + 5 * np.sin(2 * np.pi * np.arange(len(city)) / 365.25))
    smooth["pm25"] += np.random.default_rng(7).normal(0, 0.05, len(city))
    result = airhealth.fit(smooth, **OPTIONS)
    with pytest.warns(
        DataWarning, match=r"exposure 'pm25' has a variance inflation of [0-9.]+ against the confounders"
    ):
        checks = airhealth.diagnose(result, max_lag=5)
    row = checks.verdict.set_index("aspect").loc["concurvity"]
    assert row["status"] == "check" and "fewer time df" in row["what_to_try"]


def test_verdict_recommends_hac_when_residuals_are_autocorrelated(city):
    rng = np.random.default_rng(11)
    latent = np.zeros(len(city))
    for t in range(1, len(city)):
        latent[t] = 0.6 * latent[t - 1] + rng.normal(0, 0.15)
    correlated = city.assign(deaths_all=rng.poisson(40 * np.exp(latent)))
    result = airhealth.fit(correlated, **OPTIONS)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no concurvity warning expected here
        row = airhealth.diagnose(result, max_lag=10).verdict.set_index("aspect").loc["autocorrelation"]
    assert row["status"] == "check"
    assert "interval='hac'" in row["what_to_try"] and "Brumback" in row["what_to_try"]
    hac = airhealth.fit(correlated, interval="hac", **OPTIONS)
    row = airhealth.diagnose(hac, max_lag=10).verdict.set_index("aspect").loc["autocorrelation"]
    assert "already use Newey-West" in row["what_to_try"]


def test_verdict_on_a_well_specified_fit_finds_no_autocorrelation(checks):
    verdict = checks.verdict.set_index("aspect")
    assert list(verdict.index) == [
        "autocorrelation", "dispersion", "outlying days", "influential days", "leverage", "concurvity",
    ]  # fmt: skip
    assert verdict.loc["autocorrelation", "status"] == "fine"
    assert verdict.loc["dispersion", "finding"].startswith(f"dispersion {checks.dispersion:.2f}")


def test_flagged_days_follow_their_documented_rules(result, checks):
    table = checks.influence
    n, p = result.n_days, len(result.coef)
    assert set(checks.influential_days["date"]) == set(table.loc[table["cooks_distance"] > 4 / n, "date"])
    assert set(checks.high_leverage_days["date"]) == set(table.loc[table["leverage"] > 2 * p / n, "date"])
    assert set(checks.outlying_days["date"]) == set(table.loc[table["standardized_residual"].abs() > 3, "date"])
    assert checks.influential_days["cooks_distance"].is_monotonic_decreasing
    first = checks.outlying_days["date"].iloc[0].strftime("%Y-%m-%d")
    assert first in checks.verdict.set_index("aspect").loc["outlying days", "finding"]


def test_diagnostics_are_read_only_and_survive_pickling(result, checks):
    with pytest.raises(AttributeError, match="read-only"):
        checks.max_lag = 3
    given = checks.autocorrelation
    given.loc[0, "acf"] = 5.0
    assert checks.autocorrelation.loc[0, "acf"] != 5.0
    again = pickle.loads(pickle.dumps(result))
    np.testing.assert_array_equal(again.design_matrix.to_numpy(), result.design_matrix.to_numpy())
    given = result.design_matrix
    given.iloc[0, 0] = 123.0
    assert result.design_matrix.iloc[0, 0] != 123.0


@pytest.mark.parametrize("bad", [0, 274, 2.5, True])
def test_max_lag_out_of_range_is_named(result, bad):
    with pytest.raises(SpecificationError, match=rf"max_lag={bad!r} must be a whole number from 1 to 273"):
        airhealth.diagnose(result, max_lag=bad)


def test_diagnose_refuses_what_is_not_a_fit():
    with pytest.raises(SpecificationError, match=r"diagnose needs a FitResult from airhealth\.fit, got DataFrame"):
        airhealth.diagnose(pd.DataFrame())


def test_diagnostics_with_aliased_columns_use_the_columns_fitted():
    from make_long_gap_input import gapped_city

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        result = airhealth.fit(gapped_city(), outcome="deaths_all", exposure="pm25", lag="0", temperature="temperature")
    assert result.aliased
    checks = airhealth.diagnose(result, max_lag=10)
    assert checks.influence["leverage"].sum() == pytest.approx(len(result.coef), rel=1e-9)  # trace of the hat matrix
    assert (checks.autocorrelation["n_pairs"] < result.n_days - checks.autocorrelation["lag"]).all()  # the gap year


def test_figures_draw_on_the_given_axes(city, result, checks):
    from matplotlib.figure import Figure

    ax = Figure().add_subplot()
    assert checks.plot_autocorrelation(ax=ax) is ax
    assert len(ax.collections) == 2  # ACF and PACF stems
    assert checks.plot_residuals_over_time().get_ylabel() == "deviance residual"
    temperature = city.set_index("date")["temperature"]
    assert checks.plot_residuals_against(temperature).get_xlabel() == "temperature (°C)"  # with its unit


def test_residuals_against_a_series_without_dates_is_explained(checks):
    with pytest.raises(DataError, match=r"Series indexed by date, e\.g\. data\.set_index\('date'\)\['temperature'\]"):
        checks.plot_residuals_against(pd.Series([1.0, 2.0], name="temperature"))
    other = pd.Series([1.0, 2.0], index=pd.to_datetime(["1990-01-01", "1990-01-02"]), name="humidity")
    with pytest.raises(
        DataError, match=r"'humidity' has no value on the days the model used \(2015-01-04 to 2017-12-31\)"
    ):
        checks.plot_residuals_against(other)
