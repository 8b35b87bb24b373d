"""The time-stratified case-crossover against R: ``glm`` with stratum indicator columns and ``clogit``.

Sources: base R glm (R Core Team), splines::ns, survival::clogit (Therneau); the equivalence of the
conditional Poisson model and the conditional logistic case-crossover: Armstrong, Gasparrini & Tobias (2014),
BMC Med Res Methodol 14:122.

``tests/reference/case_crossover.R`` reads four years of the Norhaven sample (written by
``tests/reference/make_case_crossover_input.py``), builds the year × month × day-of-week strata, the
temperature splines and the lag columns itself and fits ``glm(y ~ exposure + ns(temperature, 6) +
ns(mean temperature lags 1-3, 6) + factor(stratum))`` with quasipoisson and poisson (moving average 0-1 and
distributed lag 0-5), and ``clogit(case ~ pm25 + temperature + strata(set))`` on the expanded case–referent
data of 2010 (one matched set per event: the event day and every usable day of its stratum; see the
script). Values are frozen in ``tests/reference/case_crossover.json`` and always compared; when Rscript
exists the script also runs live.

Tolerances
----------
* Coefficients and SEs versus ``summary.glm``: 1e-6 relative (the issue's requirement; ``summary.glm``
  uses the IRLS weights of the start of its last iteration).
* SEs recomputed at the final fitted means, dispersion, deviance: 1e-9 relative (the same formula at the
  same optimum; what is left is the 1e-10/1e-12 convergence tolerances).
* clogit coefficients and SEs: 1e-6 relative (coxph's Newton iteration stops at its own 1e-12 tolerance on
  the log partial likelihood).
* Days used, residual df and strata counts: exact.
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import REFERENCE_DIR, frozen_reference, rel_diff, run_r_reference
from make_case_crossover_input import input_table, write_input

import airhealth

R_SCRIPT = REFERENCE_DIR / "case_crossover.R"
FROZEN = frozen_reference("case_crossover")
CASES = [(f["name"], f["family"]) for f in FROZEN["fits"]]
REL_SUMMARY = 1e-6
REL_FINAL = 1e-9


@pytest.fixture(scope="module")
def table():
    return input_table()


@pytest.fixture(scope="module")
def fits(table):
    return {
        (lag, family): airhealth.fit(
            table, "deaths_all", "pm25", lag=lag, temperature="temperature", design="case-crossover",
            overdispersion=family == "quasipoisson",
        )
        for lag, family in CASES
    }  # fmt: skip


@pytest.fixture(scope="module")
def clogit_example(table):
    """2010, respiratory admissions, pm25 at lag 0 and temperature linear, no over-dispersion correction."""
    small = table[table["date"].dt.year == 2010]
    return airhealth.fit(
        small, "admissions_respiratory", "pm25", lag="0", confounders=["temperature"], design="case-crossover",
        overdispersion=False,
    )  # fmt: skip


@pytest.fixture(scope="module")
def live(rscript, tmp_path_factory):
    tmp = tmp_path_factory.mktemp("case_crossover")
    csv = write_input(tmp / "case_crossover_input.csv")
    return run_r_reference(rscript, R_SCRIPT, csv, out=tmp / "case_crossover.json")


def check_against(result, ref: dict) -> None:
    assert result.n_days == ref["n_used"]
    assert result.df_resid == ref["df_resid"]
    assert len(result.coef) + ref["n_strata"] == ref["n_coef"]  # R estimates the stratum intercepts
    record = result.to_dict()
    assert record["design"] == "case-crossover"
    for key in ("n_strata", "n_strata_without_events", "n_strata_single_day"):
        assert record[key] == ref[key]
    assert rel_diff(result.exposure_coef, ref["cumulative_coef"]) < REL_SUMMARY
    assert rel_diff(result.exposure_se, ref["cumulative_se"]) < REL_SUMMARY
    assert rel_diff(result.exposure_se, ref["cumulative_se_final_mu"]) < REL_FINAL
    assert rel_diff(result.dispersion, ref["dispersion_final_mu"]) < REL_FINAL
    assert rel_diff(result.deviance, ref["deviance"]) < REL_FINAL
    if ref["n_params"] > 1:  # distributed lag: each lag's coefficient and SE
        lags = result.lag_coefficients()
        assert rel_diff(lags["coef"], ref["lag_coef"]) < REL_SUMMARY
        assert rel_diff(lags["se"], ref["lag_se"]) < REL_SUMMARY
        assert rel_diff(lags["se"], ref["lag_se_final_mu"]) < REL_FINAL
    if "aic" in ref:  # Poisson: R's AIC counts the stratum intercepts as parameters, and so do we
        assert rel_diff(result.qaic, ref["aic"]) < REL_FINAL


def test_frozen_reference_covers_the_cases(table):
    assert FROZEN["n_calendar_days"] == len(table)
    assert CASES == [("0-1", "quasipoisson"), ("0-1", "poisson"), ("dl0-5", "quasipoisson")]


@pytest.mark.parametrize("case", CASES, ids=[f"{lag}-{fam}" for lag, fam in CASES])
def test_case_crossover_matches_frozen_r_glm_with_stratum_indicators(fits, case):
    check_against(fits[case], FROZEN["fits"][CASES.index(case)])


def test_overdispersion_scales_only_the_standard_errors(fits):
    quasi, plain = fits[("0-1", "quasipoisson")], fits[("0-1", "poisson")]
    assert quasi.exposure_coef == pytest.approx(plain.exposure_coef, rel=1e-12)
    assert quasi.exposure_se == pytest.approx(plain.exposure_se * np.sqrt(quasi.dispersion), rel=1e-10)
    assert plain.dispersion == 1.0 and plain.to_dict()["family"] == "poisson"


def check_clogit(result, ref: dict) -> None:
    coef = result.coef[["pm25[0]", "temperature"]].to_numpy()
    se = result.std_err[["pm25[0]", "temperature"]].to_numpy()
    assert result.strata["n_strata"] == ref["n_strata"]
    assert rel_diff(coef, ref["coef"]) < REL_SUMMARY
    assert rel_diff(se, ref["se"]) < REL_SUMMARY
    assert rel_diff(coef, ref["glm_coef"]) < REL_SUMMARY
    assert rel_diff(se, ref["glm_se"]) < REL_SUMMARY


def test_conditional_poisson_equals_frozen_clogit_on_expanded_case_referent_sets(clogit_example):
    check_clogit(clogit_example, FROZEN["clogit"])
    assert FROZEN["clogit"]["n_sets"] == int(clogit_example.observed.sum())  # one matched set per event


@pytest.mark.needs_r
@pytest.mark.parametrize("case", CASES, ids=[f"{lag}-{fam}" for lag, fam in CASES])
def test_case_crossover_matches_live_r_glm_with_stratum_indicators(fits, live, case):
    check_against(fits[case], live["fits"][CASES.index(case)])


@pytest.mark.needs_r
def test_conditional_poisson_equals_live_clogit(clogit_example, live):
    check_clogit(clogit_example, live["clogit"])


@pytest.mark.needs_r
def test_frozen_reference_is_up_to_date(live):
    for new, old in zip(live["fits"], FROZEN["fits"], strict=True):
        for key in ("lag_coef", "lag_se", "cumulative_coef", "cumulative_se", "deviance"):
            np.testing.assert_allclose(new[key], old[key], rtol=1e-9, err_msg=f"{new['name']} {key}")
        assert new["n_used"] == old["n_used"]
    np.testing.assert_allclose(live["clogit"]["coef"], FROZEN["clogit"]["coef"], rtol=1e-9)
