"""Distributed lags of PM2.5 on deaths against base R ``glm(family = quasipoisson)`` on explicit lag columns.

Source: base R glm (R Core Team), splines::ns.

``tests/reference/dl_reference.R`` reads the daily sample table written by
``tests/reference/make_dl_input.py``, builds the lag columns pm25 lag0..lag5 (and the lag matrices of the
constrained lags) itself, builds the confounders with ``splines::ns`` inside the formula
(``ns(time, df = 98) + ns(temperature, 6) + ns(temp_mean_lag1_3, 6) + factor(dow)``) and fits ``glm``.
For the constrained lags R fits the GLM on the basis-projected columns ``Q C`` with its own ``C``: raw
powers ``1, l, l², l³`` for the polynomial (airhealth uses Legendre polynomials, an equivalent
parametrisation, so only the per-lag curve ``C θ`` is comparable) and ``splines::ns(0:21, knots,
intercept = TRUE)`` for the spline lags. Values are frozen in ``tests/reference/dl_reference.json`` and
always compared; when Rscript exists the script also runs live.

Tolerances
----------
* Per-lag coefficients, SEs, cumulative coefficient and SE versus ``summary.glm``: 1e-6 relative (the
  issue's requirement; ``summary.glm`` uses the IRLS weights from the start of its last iteration, about
  1e-8 relative from the final ones, so exact agreement is not expected).
* The same SEs recomputed in R at the final fitted means, the dispersion and the deviance: 1e-9 relative
  (the same formula at the same optimum; what is left is the 1e-10 deviance convergence tolerance).
* Days used and residual df: exact.
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import REFERENCE_DIR, frozen_reference, rel_diff, run_r_reference
from make_dl_input import write_input

from airhealth.model.fitting import fit

R_SCRIPT = REFERENCE_DIR / "dl_reference.R"
FROZEN = frozen_reference("dl_reference")
NAMES = [f["name"] for f in FROZEN["fits"]]

REL_SUMMARY = 1e-6
REL_FINAL = 1e-9


@pytest.fixture(scope="module")
def fits(_sample_once):
    return {name: fit(_sample_once, "deaths_all", "pm25", lag=name, temperature="temperature") for name in NAMES}


@pytest.fixture(scope="module")
def live(rscript, tmp_path_factory):
    tmp = tmp_path_factory.mktemp("dl_reference")
    csv = write_input(tmp / "dl_input.csv")
    return run_r_reference(rscript, R_SCRIPT, csv, out=tmp / "dl_reference.json")


def check_against(result, ref: dict) -> None:
    lags = result.lag_coefficients()
    assert lags["lag"].tolist() == ref["lags"]
    assert result.n_days == ref["n_used"]
    assert result.df_resid == ref["df_resid"]
    assert len(result.coef) == ref["n_coef"]
    assert rel_diff(lags["coef"], ref["lag_coef"]) < REL_SUMMARY
    assert rel_diff(lags["se"], ref["lag_se"]) < REL_SUMMARY
    assert rel_diff(result.exposure_coef, ref["cumulative_coef"]) < REL_SUMMARY
    assert rel_diff(result.exposure_se, ref["cumulative_se"]) < REL_SUMMARY
    assert rel_diff(lags["coef"], ref["lag_coef"]) < REL_FINAL
    assert rel_diff(lags["se"], ref["lag_se_final_mu"]) < REL_FINAL
    assert rel_diff(result.exposure_se, ref["cumulative_se_final_mu"]) < REL_FINAL
    assert rel_diff(result.dispersion, ref["dispersion_final_mu"]) < REL_FINAL
    assert rel_diff(result.deviance, ref["deviance"]) < REL_FINAL
    # the JSON record: top-level effect is the cumulative one, per-lag rows match too
    record = result.to_dict(per=10)
    assert rel_diff(record["coef"], ref["cumulative_coef"]) < REL_SUMMARY
    assert record["cumulative"]["se"] == record["se"]
    assert rel_diff([row["coef"] for row in record["lags"]], ref["lag_coef"]) < REL_SUMMARY
    assert rel_diff([row["rr"] for row in record["lags"]], np.exp(10 * np.asarray(ref["lag_coef"]))) < 1e-9


def test_frozen_reference_covers_the_lag_structures(_sample_once):
    assert FROZEN["n_calendar_days"] == len(_sample_once)
    assert NAMES == ["dl0-5", "dl0-7:poly3", "dl0-21:spline4", "dl0-21:spline4:log"]
    # R placed the spline knots by the documented rule; airhealth's objects give the same knots
    from airhealth.model.bases.lag_structures import parse_lag

    for ref in FROZEN["fits"]:
        if "knots" in ref:
            assert parse_lag(ref["name"]).interior_knots == pytest.approx(ref["knots"], rel=1e-12)


@pytest.mark.parametrize("name", NAMES)
@pytest.mark.filterwarnings("ignore:exposure .* leaves:airhealth.errors.DataWarning")  # long lags lose days by design
def test_distributed_lag_matches_frozen_r_glm(fits, name):
    check_against(fits[name], next(f for f in FROZEN["fits"] if f["name"] == name))


def test_unconstrained_cumulative_is_sum_of_lags_with_one_v_one_se(fits):
    # Schwartz (2000): the overall effect of an unconstrained distributed lag is the sum of the per-lag
    # coefficients; its SE is sqrt(1' V 1) from the lag block of the covariance.
    r = fits["dl0-5"]
    v = r.cov.loc[list(r.exposure_columns), list(r.exposure_columns)].to_numpy()
    assert r.exposure_coef == pytest.approx(r.coef[list(r.exposure_columns)].sum(), rel=1e-12)
    assert r.exposure_se == pytest.approx(np.sqrt(v.sum()), rel=1e-12)


@pytest.mark.needs_r
@pytest.mark.parametrize("name", NAMES)
def test_distributed_lag_matches_live_r_glm(fits, live, name):
    check_against(fits[name], next(f for f in live["fits"] if f["name"] == name))


@pytest.mark.needs_r
def test_frozen_reference_is_up_to_date(live):
    assert [f["name"] for f in live["fits"]] == NAMES
    for new, old in zip(live["fits"], FROZEN["fits"], strict=True):
        for key in ("lag_coef", "lag_se", "cumulative_coef", "cumulative_se", "deviance"):
            np.testing.assert_allclose(new[key], old[key], rtol=1e-9, err_msg=f"{new['name']} {key}")
        assert new["n_used"] == old["n_used"]
