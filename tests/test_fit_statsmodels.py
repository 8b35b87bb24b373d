"""airhealth's fit against statsmodels' GLM on the very same design matrix.

Reference: statsmodels GLM (Seabold S, Perktold J (2010). Statsmodels: econometric and statistical
modeling with Python. Proceedings of the 9th Python in Science Conference), fitted by its own IRLS with
``scale="X2"`` (Pearson χ² / residual df, i.e. quasi-Poisson) and a deviance tolerance of 1e-13.

This isolates the engine and the result bookkeeping from the design construction (which the base R
comparison covers): both programs see one matrix, so coefficients, SEs and the dispersion agree to
1e-9 relative — the remaining differences are the convergence tolerances (airhealth: relative deviance
change 1e-10) and rounding in different linear-algebra routes (Cholesky vs. pseudo-inverse).
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

import airhealth
from airhealth.model.design import build_design, model_frame
from airhealth.model.spec import ModelSpec

REL = 1e-9


@pytest.fixture
def six_years(sample):
    """2015–2020 of the Norhaven sample (2192 days; keeps statsmodels' pseudo-inverse IRLS fast)."""
    keep = (sample["date"] >= "2015-01-01") & (sample["date"] <= "2020-12-31")
    return sample.loc[keep].reset_index(drop=True)


def _design(data, **options):
    spec = ModelSpec.from_options(**options)
    design = build_design(model_frame(data, spec), spec)
    return spec, design


def _statsmodels(design, family, **fit_options):
    """statsmodels GLM fit, restarted once from its own estimate.

    statsmodels (like R's ``summary.glm``) computes the covariance with the weights from the start of
    its last IRLS iteration; restarting from its own converged coefficients puts those weights at the
    optimum, so SEs can be compared at 1e-9 rather than ~1e-8.
    """
    model = sm.GLM(design.response, design.matrix, family=family, offset=design.offset)
    first = model.fit(tol=1e-13, **fit_options)
    return model.fit(tol=1e-13, start_params=first.params, **fit_options)


def _assert_coefs_close(ours, theirs, se):
    # Relative 1e-9, with an absolute floor of 1e-8 SE for coefficients close to zero: statsmodels stops
    # its IRLS when the deviance stops changing, with a score X'(y - mu) of order 1e-7 rather than 0,
    # which moves coefficients by a few 1e-9 of their SE.
    assert np.all(np.abs(ours - theirs) <= REL * np.abs(theirs) + 1e-8 * se)


@pytest.mark.parametrize(
    "options",
    [
        {"outcome": "deaths_all", "exposure": "pm25", "lag": "0-1", "temperature": "temperature"},
        {
            "outcome": "admissions_respiratory",
            "exposure": "no2",
            "lag": "0",
            "temperature": "temperature",
            "humidity": "humidity",
            "holidays": "GB",
        },
        {"outcome": "admissions_cardiovascular", "exposure": "o3", "lag": "2", "seasonality": "fourier"},
    ],
    ids=["deaths-pm25-01", "resp-no2-0-humidity-holidays", "cardio-o3-2-fourier"],
)
def test_quasipoisson_matches_statsmodels_on_the_same_design(six_years, options):
    _, design = _design(six_years, **options)
    ref = _statsmodels(design, sm.families.Poisson(), scale="X2")
    result = airhealth.fit(six_years, **options)
    ours = result.coef.to_numpy()
    se = result.std_err.to_numpy()
    _assert_coefs_close(ours, ref.params, se)
    np.testing.assert_allclose(se, ref.bse, rtol=REL)
    assert result.dispersion == pytest.approx(ref.scale, rel=REL)
    assert result.deviance == pytest.approx(ref.deviance, rel=REL)
    assert result.df_resid == ref.df_resid
    j = design.exposure_slice.start
    assert result.exposure_coef == pytest.approx(ref.params[j], rel=REL)
    assert result.exposure_se == pytest.approx(ref.bse[j], rel=REL)
    np.testing.assert_allclose(result.cov.to_numpy(), ref.cov_params(), rtol=1e-8, atol=1e-12 * se.max() ** 2)


def test_poisson_matches_statsmodels_loglik_and_aic(six_years):
    options = {
        "outcome": "deaths_all",
        "exposure": "pm10",
        "lag": "0-1",
        "temperature": "temperature",
        "family": "poisson",
    }
    _, design = _design(six_years, **options)
    ref = _statsmodels(design, sm.families.Poisson())
    result = airhealth.fit(six_years, **options)
    np.testing.assert_allclose(result.std_err.to_numpy(), ref.bse, rtol=REL)
    assert result.dispersion == 1.0
    assert result.loglik == pytest.approx(ref.llf, rel=REL)
    assert result.qaic == pytest.approx(ref.aic, rel=REL)  # for Poisson the QAIC reported is the AIC


def test_negative_binomial_with_fixed_theta_matches_statsmodels(six_years):
    # statsmodels' NB2 family has Var = mu + alpha mu^2, i.e. alpha = 1 / theta.
    from airhealth.model.engine.irls import fit_glm

    _, design = _design(six_years, outcome="deaths_all", exposure="pm25", lag="0-1", temperature="temperature")
    theta = 80.0
    ours = fit_glm(design.matrix, design.response, family="negbin", theta=theta)
    ref = _statsmodels(design, sm.families.NegativeBinomial(alpha=1 / theta))
    _assert_coefs_close(ours.coef, ref.params, ours.std_err)
    np.testing.assert_allclose(ours.std_err, ref.bse, rtol=REL)
    assert ours.deviance == pytest.approx(ref.deviance, rel=REL)
    assert ours.loglik == pytest.approx(ref.llf, rel=REL)


def test_offset_matches_statsmodels(six_years):
    data = six_years.assign(log_population=np.log(np.linspace(5e5, 6e5, len(six_years))))
    options = {
        "outcome": "deaths_all",
        "exposure": "pm25",
        "lag": "0",
        "temperature": "temperature",
        "offset": "log_population",
    }
    _, design = _design(data, **options)
    ref = _statsmodels(design, sm.families.Poisson(), scale="X2")
    result = airhealth.fit(data, **options)
    _assert_coefs_close(result.coef.to_numpy(), ref.params, result.std_err.to_numpy())
    np.testing.assert_allclose(result.std_err.to_numpy(), ref.bse, rtol=REL)
    assert result.dispersion == pytest.approx(ref.scale, rel=REL)
