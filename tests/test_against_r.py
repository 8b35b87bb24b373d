"""airhealth.fit against base R ``glm(family = quasipoisson)`` with ``splines::ns`` on the Norhaven sample.

Source: base R glm (R Core Team, R: A Language and Environment for Statistical Computing), splines::ns;
MASS::glm.nb (Venables & Ripley 2002, Modern Applied Statistics with S, 4th ed.) for the negative binomial.

The reference numbers come from ``tests/reference/glm_reference.R``, which merges the three sample CSV
tables on a complete calendar, builds lags and moving averages itself (a mean is missing if any of its
days is missing) and fits the models with ``glm`` (invocation in its header). They are frozen in
``tests/reference/glm_reference.json`` and always compared; when Rscript is installed the script is also
run live once per session and its output compared in the same way.

Tolerances
----------
* Coefficient, SE and dispersion versus ``summary.glm``: 1e-6 relative (the issue's requirement).
  ``summary.glm`` computes the dispersion and covariance with the IRLS weights from the *start* of the
  last iteration, which differ from the weights at the final fitted means by about 1e-8 relative, so an
  exact match is not expected; 1e-6 leaves a wide margin while catching any modelling difference (a
  knot placed differently or one day shifted changes the coefficient in the 3rd–4th digit).
* The same quantities recomputed in R at the final fitted means, and deviance / QAIC / AIC: 1e-9
  relative (both programs then evaluate the same formula at the same optimum; what remains is the
  convergence tolerance of 1e-10 on the deviance and rounding in sums over ~5000 days).
* Negative binomial θ: 1e-6 relative (θ is estimated iteratively by both programs; airhealth stops when
  the relative change of θ is below 1e-8).
* Days used and residual df: exact.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from conftest import REFERENCE_DIR, frozen_reference, rel_diff, run_r_reference

import airhealth

REPO = REFERENCE_DIR.parent.parent

R_SCRIPT = REFERENCE_DIR / "glm_reference.R"
FROZEN = frozen_reference("glm_reference")
VARIANTS = [f["name"] for f in FROZEN["fits"]]

REL_SUMMARY = 1e-6
REL_FINAL = 1e-9
REL_THETA = 1e-6


def options_for(ref: dict) -> dict:
    """airhealth.fit arguments for one R variant."""
    return {
        "outcome": ref["outcome"],
        "exposure": ref["exposure"],
        "lag": ref["lag"],
        "temperature": "temperature" if ref["temperature"] else None,
        "humidity": "humidity" if ref["humidity"] else None,
        "seasonality": ref["season"],
        "family": ref["family"],
        "trend_df_per_year": 7,
    }


@pytest.fixture(scope="module")
def fits() -> dict[str, airhealth.FitResult]:
    """One airhealth fit per R variant, shared by the frozen and the live comparisons."""
    data = airhealth.load_sample()
    return {ref["name"]: airhealth.fit(data, **options_for(ref)) for ref in FROZEN["fits"]}


@pytest.fixture(scope="module")
def live(rscript, tmp_path_factory) -> dict:
    """Run the R script once per session into a temporary file and read its output."""
    out = tmp_path_factory.mktemp("r_reference") / "glm_reference.json"
    return run_r_reference(rscript, R_SCRIPT, REPO / "airhealth" / "data", out=out)


def check_against(result: airhealth.FitResult, ref: dict) -> None:
    assert result.n_days == ref["n_used"]
    assert result.df_resid == ref["df_resid"]
    assert len(result.coef) == ref["n_coef"]
    assert rel_diff(result.exposure_coef, ref["coef"]) < REL_SUMMARY
    assert rel_diff(result.exposure_se, ref["se"]) < REL_SUMMARY
    assert rel_diff(result.dispersion, ref["dispersion"]) < REL_SUMMARY
    assert rel_diff(result.exposure_coef, ref["coef"]) < REL_FINAL
    assert rel_diff(result.exposure_se, ref["se_final_mu"]) < REL_FINAL
    assert rel_diff(result.dispersion, ref["dispersion_final_mu"]) < REL_FINAL
    assert rel_diff(result.deviance, ref["deviance"]) < REL_FINAL
    if ref["family"] == "quasipoisson":
        assert rel_diff(result.qaic, ref["qaic"]) < REL_FINAL
    else:  # Poisson AIC; negative binomial AIC counting theta as a parameter
        assert rel_diff(result.qaic, ref["aic"]) < REL_FINAL
    if ref["family"] == "negbin":
        assert rel_diff(result.theta, ref["theta"]) < REL_THETA


def test_frozen_reference_describes_the_shipped_sample(sample):
    assert FROZEN["n_calendar_days"] == len(sample)
    assert FROZEN["time_df"] == round(7 * len(sample) / 365.25) == 98
    assert set(VARIANTS) >= {"main", "lag0", "lag2", "no_temperature", "humidity_3df", "fourier_4", "poisson"}


@pytest.mark.parametrize("name", VARIANTS)
def test_fit_matches_frozen_r_reference(fits, name):
    ref = next(f for f in FROZEN["fits"] if f["name"] == name)
    check_against(fits[name], ref)


def test_quasipoisson_and_poisson_share_the_estimate_but_not_the_se(fits):
    # Same point estimate; the quasi-Poisson SE is the Poisson SE times sqrt(dispersion) (McCullagh &
    # Nelder 1989, Generalized Linear Models, 2nd ed., section 9.2).
    qp, po = fits["main"], fits["poisson"]
    assert qp.exposure_coef == pytest.approx(po.exposure_coef, rel=1e-12)
    assert qp.exposure_se == pytest.approx(po.exposure_se * qp.dispersion**0.5, rel=1e-9)
    assert po.dispersion == 1.0


@pytest.mark.needs_r
@pytest.mark.parametrize("name", VARIANTS)
def test_fit_matches_live_r(fits, live, name):
    ref = next(f for f in live["fits"] if f["name"] == name)
    check_against(fits[name], ref)


@pytest.mark.needs_r
def test_frozen_reference_is_up_to_date(live):
    # The committed JSON must be what the committed script gives on the shipped data (to 1e-9; R's own
    # results are reproducible to the last digit on one machine, but BLAS may differ across machines).
    assert [f["name"] for f in live["fits"]] == VARIANTS
    for new, old in zip(live["fits"], FROZEN["fits"], strict=True):
        for key in ("coef", "se", "dispersion", "deviance", "se_final_mu"):
            assert new[key] == pytest.approx(old[key], rel=1e-9), (new["name"], key)
        assert new["n_used"] == old["n_used"]


def test_spline_knots_come_from_the_whole_period_before_rows_are_dropped(fits, sample):
    # As splines::ns inside glm's model.frame: quantiles of all non-missing values of the calendar (here
    # the mean temperature of lags 1-3), not only of the days left after dropping days with a missing
    # exposure.
    basis = fits["main"].bases["spline(temperature[mean lags 1-3])"]
    temperature = sample["temperature"]
    mean13 = ((temperature.shift(1) + temperature.shift(2) + temperature.shift(3)) / 3).to_numpy()
    full = mean13[np.isfinite(mean13)]
    probs = np.arange(1, 6) / 6
    np.testing.assert_allclose(basis.interior_knots, np.quantile(full, probs), rtol=1e-12)
    np.testing.assert_allclose(basis.boundary_knots, (full.min(), full.max()), rtol=1e-12)
    used = pd.Series(mean13, index=sample["date"]).loc[fits["main"].observed.index].to_numpy()
    assert not np.allclose(basis.interior_knots, np.quantile(used, probs), rtol=1e-9, atol=0)
