"""Responses the engine cannot fit get a FitError naming the outcome, never a traceback or an absurd statistic.

The engine must be safe on its own, whatever the preparation layer lets through:
* every count zero: the likelihood has no finite maximum (for y = 0 the Poisson log-likelihood is
  -sum(mu), which keeps increasing as the intercept goes to minus infinity and mu to 0; the same holds for
  the negative binomial, whose log-likelihood at y = 0 is -theta log(1 + mu/theta));
* constant counts with quasi-Poisson: the model reproduces every count, the Pearson dispersion is 0 and
  QAIC = -2 loglik / 0 (it was reported as 6e33): an error. With Poisson the same counts are a legal fit
  (dispersion fixed at 1), checked against statsmodels; with a negative binomial they fall back to Poisson
  (no over-dispersion).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm

import airhealth
from airhealth.errors import AirhealthError, FitError
from airhealth.model.engine.irls import fit_glm


@pytest.fixture(scope="module")
def design():
    rng = np.random.default_rng(21)
    n = 400
    t = np.arange(n) / n
    X = np.column_stack([np.ones(n), t, np.sin(6 * t), rng.normal(20, 5, n)])
    y = rng.poisson(np.exp(2.5 + 0.3 * t)).astype(float)
    return X, y


@pytest.mark.parametrize("family", ["poisson", "quasipoisson", "negbin"])
def test_all_zero_counts_are_refused_naming_the_outcome(design, family):
    X, _ = design
    with pytest.raises(FitError, match=r"the outcome 'deaths_all' is zero on all 400 days used \(no events\)"):
        fit_glm(X, np.zeros(len(X)), family=family, response_name="deaths_all")


def test_counts_only_on_zero_weight_rows_are_still_no_events(design):
    X, y = design
    w = (np.arange(len(y)) >= 10).astype(float)
    counts = np.where(w > 0, 0.0, y)
    with pytest.raises(FitError, match=r"y is zero on all 390 days used"):
        fit_glm(X, counts, weights=w)


def test_constant_counts_with_quasipoisson_are_refused(design):
    X, _ = design
    with pytest.raises(FitError, match=r"reproduces the outcome 'deaths_all' exactly.*dispersion cannot be estimated"):
        fit_glm(X, np.full(len(X), 7.0), family="quasipoisson", response_name="deaths_all")


def test_constant_counts_with_poisson_are_a_legal_fit(design):
    X, _ = design
    y = np.full(len(X), 7.0)
    fit = fit_glm(X, y, family="poisson")
    ref = sm.GLM(y, X, family=sm.families.Poisson()).fit(tol=1e-13)
    np.testing.assert_allclose(fit.coef, ref.params, rtol=1e-8, atol=1e-10)
    assert fit.qaic == pytest.approx(ref.aic, rel=1e-9)
    assert np.isfinite(fit.qaic) and fit.qaic < 1e5


def test_constant_counts_with_negbin_fall_back_to_poisson(design):
    X, _ = design
    fit = fit_glm(X, np.full(len(X), 7.0), family="negbin")
    assert fit.family == "poisson" and "no over-dispersion" in fit.notes[0]


@pytest.mark.parametrize("family", ["poisson", "quasipoisson", "negbin"])
def test_all_zero_outcome_through_fit_is_an_error_not_a_result(family):
    data = airhealth.load_sample()
    data = data[data["date"] < "2012-01-01"].assign(deaths_all=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with pytest.raises(AirhealthError, match=r"'deaths_all'.*(zero|no events)"):
            airhealth.fit(data, "deaths_all", "pm25", temperature="temperature", family=family)


def test_constant_outcome_through_fit_gives_no_absurd_qaic():
    data = airhealth.load_sample()
    data = data[data["date"] < "2012-01-01"].assign(deaths_all=12)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with pytest.raises(AirhealthError, match=r"'deaths_all'"):
            airhealth.fit(data, "deaths_all", "pm25", temperature="temperature")


@pytest.fixture
def short_sample_csv(tmp_path):
    data = airhealth.load_sample()
    data = data[data["date"] < "2012-01-01"]
    paths = {}
    for name, counts in (("zero", 0), ("constant", 9)):
        paths[name] = tmp_path / f"{name}.csv"
        data.assign(deaths_all=counts).to_csv(paths[name], index=False)
    return paths


def test_cli_poisson_on_an_all_zero_outcome_is_a_one_line_error(short_sample_csv, capsys):
    from airhealth.cli.main import main

    args = ["fit", str(short_sample_csv["zero"]), "--outcome", "deaths_all", "--exposure", "pm25", "--family"]
    assert main([*args, "poisson"]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err
    assert "'deaths_all'" in err and ("zero" in err or "no events" in err)


def test_cli_negbin_on_constant_counts_is_refused_before_fitting(short_sample_csv, capsys):
    # The preparation layer refuses constant counts for every family (airhealth.prep.degenerate), so the
    # engine's Poisson fallback is never reached from the command line with such data.
    from airhealth.cli.main import main

    args = ["fit", str(short_sample_csv["constant"]), "--outcome", "deaths_all", "--exposure", "pm25"]
    assert main([*args, "--family", "negbin"]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err
    assert "'deaths_all' has the same count, 9, on all 730 days" in err


def test_a_single_event_is_too_few_not_a_collinear_design(design):
    # The design is full rank; with one event the fitted means fall to zero on the other days and the
    # weighted information matrix loses rank. The message must say that, not blame collinear columns.
    X, _ = design
    y = np.zeros(len(X))
    y[5] = 3.0
    assert np.linalg.matrix_rank(X) == X.shape[1]
    with pytest.raises(FitError, match=r"the outcome 'deaths_all' has 3 event\(s\) on 1 of the 400 days used") as err:
        fit_glm(X, y, response_name="deaths_all")
    assert "too few events for this model" in str(err.value)
    assert "collinear columns)" not in str(err.value)


def test_a_collinear_design_is_still_named_as_collinear(design):
    X, y = design
    with pytest.raises(FitError, match=r"rank-deficient \(collinear columns\)"):
        fit_glm(np.column_stack([X, 2 * X[:, 1]]), y)


def test_an_overflowing_relative_risk_is_an_error_naming_the_scale():
    # An exposure in grams instead of micrograms (x 1e-6) gives a log-RR per unit of ~1e3: exp(10 * 1e3)
    # overflows a double (largest ~1.8e308 = exp(709.8), IEEE 754); this was a bare OverflowError.
    from airhealth.errors import SpecificationError
    from airhealth.model.effects import relative_risk

    with pytest.raises(SpecificationError, match=r"relative risk of 'pm25' for 10 units overflows.*rescale it"):
        relative_risk(1200.0, 300.0, per=10, exposure="pm25")
    assert relative_risk(60.0, 1.0, per=10).rr == pytest.approx(np.exp(600.0), rel=1e-12)
