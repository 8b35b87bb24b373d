"""What a pooled result gives out: tidy tables, plain dictionaries, read-only arrays, relative risks per unit.

Outside references: the frozen metafor values of ``tests/reference/pooling_reference.json`` (see
tests/test_pooling_against_r.py for their source and tolerances); the relative risk exp(per * coef) as in
:func:`airhealth.model.effects.relative_risk` (Bhaskaran et al. 2013, Int J Epidemiol 42:1187–1195).
"""

from __future__ import annotations

import doctest
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.cities import heterogeneity, multivariate, pooled_result, pooling

FROZEN = json.loads((Path(__file__).resolve().parent / "reference" / "pooling_reference.json").read_text())


def invented() -> pd.DataFrame:
    data = FROZEN["univariate"]["invented"]["data"]
    return pd.DataFrame({"city": data["city"], "coef": data["yi"], "se": np.sqrt(data["vi"]), "temp": data["temp"]})


def test_to_dict_has_the_documented_keys_and_relative_risks_per_ten_units():
    result = airhealth.pool(invented())
    d = result.to_dict()
    assert {"coef", "se", "rr", "rr_low", "rr_high", "tau2", "i2", "q", "q_p", "k", "pi_low", "pi_high"} <= set(d)
    assert d["per"] == 10.0 and d["k"] == 15
    z = 1.959963984540054  # two-sided 95% normal quantile (scipy.special.ndtri(0.975))
    assert d["rr"] == pytest.approx(np.exp(10 * d["coef"]), rel=1e-12)
    assert d["rr_low"] == pytest.approx(np.exp(10 * (d["coef"] - z * d["se"])), rel=1e-12)
    assert d["rr_high"] == pytest.approx(np.exp(10 * (d["coef"] + z * d["se"])), rel=1e-12)
    assert 0 <= d["i2"] <= 100 and d["i2"] > 1  # percent, not a fraction
    assert json.loads(json.dumps(d)) == d  # plain values only


def test_per_changes_only_the_relative_risks():
    ten, one = airhealth.pool(invented()), airhealth.pool(invented(), per=1)
    assert ten.coef == one.coef
    assert one.to_dict()["rr"] == pytest.approx(np.exp(ten.coef), rel=1e-12)


def test_table_and_summary_are_tidy_frames():
    result = airhealth.pool(invented(), moderators=["temp"])
    table = result.table()
    assert list(table["term"]) == ["intercept", "temp"]
    assert table.loc[1, "p_value"] == pytest.approx(FROZEN["univariate"]["invented"]["fits"]["REML_mods"]["qm_p"])
    summary = result.summary()
    assert len(summary) == 1 and summary.loc[0, "moderators"] == "temp"
    assert summary.loc[0, "qm"] == pytest.approx(result.moderator_test.qm)


def test_weights_are_percent_and_larger_for_more_precise_cities():
    result = airhealth.pool(invented(), method="dl")
    blup = result.blup()
    assert blup["weight_percent"].sum() == pytest.approx(100)
    order = np.argsort(blup["se"].to_numpy())
    assert np.all(np.diff(blup["weight_percent"].to_numpy()[order]) <= 0)


def test_shrunken_estimates_lie_between_the_city_and_the_pooled_estimate():
    result = airhealth.pool(invented())
    blup = result.blup()
    low = np.minimum(blup["estimate"], result.coef)
    high = np.maximum(blup["estimate"], result.coef)
    assert np.all((blup["blup"] >= low) & (blup["blup"] <= high))
    assert np.all(blup["blup_se"] < blup["se"])


def test_result_is_read_only_and_the_callers_table_is_unchanged():
    table = invented()
    before = table.copy(deep=True)
    result = airhealth.pool(table, moderators=["temp"])
    pd.testing.assert_frame_equal(table, before)
    with pytest.raises(ValueError, match="read-only"):
        result.coefs[0] = 1.0
    with pytest.raises(AttributeError):
        result.method = "dl"
    blup = result.blup()
    blup.loc[0, "blup"] = 99.0
    assert result.blup().loc[0, "blup"] != 99.0


def test_city_order_does_not_change_the_result():
    table = invented()
    shuffled = table.sample(frac=1, random_state=5).reset_index(drop=True)
    for method in ("reml", "dl", "fixed"):
        a, b = airhealth.pool(table, method=method), airhealth.pool(shuffled, method=method)
        assert b.coef == pytest.approx(a.coef, rel=1e-10)
        assert b.tau2 == pytest.approx(a.tau2, rel=1e-8, abs=1e-300)


def test_html_and_text_views():
    result = airhealth.pool(invented())
    assert "<table>" in result._repr_html_() and "tau2" in result._repr_html_()
    assert repr(result).startswith("PooledEffect(reml, k=15: RR per 10 = ")


# ------------------------------------------------------------------------------ multivariate with one coefficient
def one_column(name: str) -> tuple[np.ndarray, np.ndarray, dict]:
    block = FROZEN["univariate"][name]
    y = np.asarray(block["data"]["yi"])[:, None]
    v = np.asarray(block["data"]["vi"])[:, None, None]
    return y, v, block["fits"]


@pytest.mark.parametrize("name", ["bcg", "invented", "homogeneous"])
def test_one_coefficient_method_of_moments_is_dersimonian_laird_of_metafor(name):
    y, v, fits = one_column(name)
    result = airhealth.pool_multivariate(y, v, method="mm")
    ref = fits["DL_plain"]
    assert result.between_cov[0, 0] == pytest.approx(ref["tau2"], rel=1e-9, abs=1e-300)
    assert result.coef[0] == pytest.approx(ref["coef"][0], rel=1e-9)
    assert result.se[0] == pytest.approx(ref["se"][0], rel=1e-9)
    blup = result.blup()
    np.testing.assert_allclose(blup.coef.iloc[:, 0], ref["blup"]["pred"], rtol=1e-9)
    np.testing.assert_allclose(blup.se.iloc[:, 0], ref["blup"]["se"], rtol=1e-9)


@pytest.mark.parametrize("name", ["bcg", "invented"])
def test_one_coefficient_multivariate_reml_is_univariate_reml_of_metafor(name):
    # 1e-5 relative: the optimiser of the multivariate path versus Fisher scoring in metafor's rma.
    y, v, fits = one_column(name)
    result = airhealth.pool_multivariate(y, v, method="reml")
    ref = fits["REML_plain"]
    assert result.between_cov[0, 0] == pytest.approx(ref["tau2"], rel=1e-5)
    assert result.coef[0] == pytest.approx(ref["coef"][0], rel=1e-5)
    assert result.q == pytest.approx(ref["q"], rel=1e-9)
    np.testing.assert_allclose(result.blup().coef.iloc[:, 0], ref["blup"]["pred"], rtol=1e-5)


def test_multivariate_blup_shrinks_towards_the_pooled_vector_and_keeps_labels():
    block = FROZEN["multivariate"]["invented3"]
    table = pd.DataFrame(block["coefs"], columns=["lag0", "lag1", "lag2"], index=[f"c{i}" for i in range(40)])
    result = airhealth.pool_multivariate(table, block["covs"])
    blup = result.blup()
    assert list(blup.coef.columns) == ["lag0", "lag1", "lag2"] and blup.coef.index[3] == "c3"
    assert blup.cov.shape == (40, 3, 3)
    assert np.all(np.linalg.eigvalsh(blup.cov) > 0)
    # closer to the pooled vector than the raw estimates, on average
    raw = np.linalg.norm(table.to_numpy() - result.coef, axis=1)
    shrunk = np.linalg.norm(blup.coef.to_numpy() - result.coef, axis=1)
    assert shrunk.mean() < raw.mean()
    assert set(result.to_dict()) >= {"coef", "cov", "between_cov", "q", "q_df", "q_p", "k"}
    assert list(result.table()["term"]) == ["lag0", "lag1", "lag2"]


def test_between_city_covariance_is_positive_semi_definite_when_moments_are_not():
    # Homogeneous vectors: the raw moment solution has negative eigenvalues, truncated to 0; REML stays PSD.
    rng = np.random.default_rng(7)
    covs = np.array([np.diag([1.0, 2.0]) * 1e-6] * 10)
    coefs = rng.multivariate_normal([0.001, 0.0], covs[0] * 0.2, size=10)
    for method in ("mm", "reml"):
        between = airhealth.pool_multivariate(coefs, covs, method=method).between_cov
        assert np.linalg.eigvalsh(between).min() >= -1e-20
        assert np.abs(between).max() < 1e-8


@pytest.mark.parametrize("module", [heterogeneity, multivariate, pooled_result, pooling])
def test_docstring_examples_run(module):
    failures, _ = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert failures == 0


def test_multivariate_input_is_not_changed():
    block = FROZEN["multivariate"]["berkey"]
    coefs = pd.DataFrame(block["coefs"], columns=["PD", "AL"])
    covs = np.array(block["covs"])
    coefs_before, covs_before = coefs.copy(deep=True), covs.copy()
    result = airhealth.pool_multivariate(coefs, covs)
    pd.testing.assert_frame_equal(coefs, coefs_before)
    np.testing.assert_array_equal(covs, covs_before)
    with pytest.raises(ValueError, match="read-only"):
        result.between_cov[0, 0] = 0.0


def test_reml_that_does_not_converge_says_so_and_what_to_do(monkeypatch):
    monkeypatch.setattr(heterogeneity, "REML_MAX_ITER", 1)
    with pytest.raises(airhealth.FitError, match=r"did not converge in 1 Fisher scoring steps .* use method='dl'"):
        airhealth.pool(invented(), method="reml")
    monkeypatch.setattr(multivariate, "GRADIENT_TOLERANCE", -1.0)  # no point can pass the optimality check
    block = FROZEN["multivariate"]["berkey"]
    with pytest.raises(airhealth.FitError, match=r"between-city covariance did not converge .* use method='mm'"):
        airhealth.pool_multivariate(block["coefs"], block["covs"], method="reml")
