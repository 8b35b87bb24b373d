"""Relative-risk arithmetic against textbook definitions, statsmodels' Table2x2 and scipy's normal law.

Sources
-------
* Risk ratio of a 2×2 table, ``RR = [a/(a+b)] / [c/(c+d)]`` with log-scale Wald interval
  ``exp(log RR ± z·sqrt(1/a − 1/(a+b) + 1/c − 1/(c+d)))``: Rothman KJ, Greenland S, Lash TL (2008).
  Modern Epidemiology, 3rd ed., Lippincott Williams & Wilkins; reference implementation
  ``statsmodels.stats.contingency_tables.Table2x2`` (Seabold & Perktold 2010).
* RR per Δ units from a log-linear coefficient, ``exp(Δβ)``, interval ``exp(Δ(β ± 1.959964·SE))``,
  percent change ``100(RR − 1)``: common practice, no source (see also Rothman, Greenland & Lash 2008).
* Two-sided Wald p-value ``2·(1 − Φ(|β|/SE))``: ``scipy.stats.norm``.

Tolerances: 1e-12 relative where both sides evaluate the same closed form in double precision; 1e-6
relative against hand-worked numbers (written to 7 significant digits, z rounded to 1.959964).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.contingency_tables import Table2x2

import airhealth
from airhealth.errors import SpecificationError
from airhealth.report.effects import relative_risk, risk_ratio_2x2
from airhealth.report.tables import effects_table, format_effects

# --- 2×2 risk ratio ---------------------------------------------------------------------------------


def test_risk_ratio_worked_example():
    # 30 of 100 exposed and 15 of 100 unexposed fall ill: risks 0.30 and 0.15, RR = 2,
    # SE(log RR) = sqrt(1/30 − 1/100 + 1/15 − 1/100) = sqrt(0.08) = 0.2828427,
    # 95% CI = 2·exp(∓1.959964·0.2828427) = 1.148878 to 3.481658 (hand calculation).
    rr = risk_ratio_2x2(30, 70, 15, 85)
    assert rr.risk_exposed == pytest.approx(0.30, rel=1e-12)
    assert rr.risk_unexposed == pytest.approx(0.15, rel=1e-12)
    assert rr.risk_difference == pytest.approx(0.15, rel=1e-12)
    assert rr.risk_ratio == pytest.approx(2.0, rel=1e-12)
    assert rr.low == pytest.approx(1.148878, rel=1e-6)
    assert rr.high == pytest.approx(3.481658, rel=1e-6)


@pytest.mark.parametrize(
    "cells", [(30, 70, 15, 85), (12, 388, 5, 595), (1, 1, 1, 1), (250, 9750, 180, 9820), (7, 0, 3, 4)]
)
@pytest.mark.parametrize("level", [0.90, 0.95, 0.99])
def test_risk_ratio_matches_statsmodels_table2x2(cells, level):
    a, b, c, d = cells
    ours = risk_ratio_2x2(a, b, c, d, level=level)
    table = Table2x2(np.array([[a, b], [c, d]], dtype=float), shift_zeros=False)  # no 0.5 added to cells
    low, high = table.riskratio_confint(alpha=1 - level)
    assert ours.risk_ratio == pytest.approx(table.riskratio, rel=1e-12)
    assert ours.low == pytest.approx(low, rel=1e-12)
    assert ours.high == pytest.approx(high, rel=1e-12)


@pytest.mark.parametrize(
    ("cells", "message"),
    [((0, 10, 3, 7), "at least one case"), ((3, 7, 0, 10), "at least one case"), ((-1, 5, 2, 3), ">= 0")],
)
def test_risk_ratio_rejects_tables_without_a_finite_answer(cells, message):
    with pytest.raises(SpecificationError, match=message):
        risk_ratio_2x2(*cells)


# --- RR per Δ units from a coefficient ---------------------------------------------------------------


def test_relative_risk_worked_example():
    # β = 0.001 per µg/m³, SE = 0.0004, per 10 µg/m³:
    # RR = exp(0.01) = 1.010050; CI = exp(0.01 ∓ 10·1.959964·0.0004) = exp(0.00216014), exp(0.01783986)
    #    = 1.002162 to 1.018000; percent change 1.0050 %; z = 2.5, p = 2(1 − Φ(2.5)) = 0.01241933.
    e = relative_risk(0.001, 0.0004, per=10)
    assert e.rr == pytest.approx(1.010050, rel=1e-6)
    assert e.rr_low == pytest.approx(1.002162, rel=1e-6)
    assert e.rr_high == pytest.approx(1.018000, rel=1e-6)
    assert e.percent_change == pytest.approx(1.0050167, rel=1e-6)
    assert e.percent_low == pytest.approx(0.2162479, rel=1e-6)
    assert e.percent_high == pytest.approx(1.7999937, rel=1e-6)
    assert e.p_value == pytest.approx(0.01241933, rel=1e-6)


@pytest.mark.parametrize(
    ("coef", "se", "per", "level"),
    [(0.0008, 0.00047, 10, 0.95), (-0.002, 0.001, 10, 0.95), (0.0005, 0.0002, 25.3, 0.90), (0.01, 0.02, 1, 0.99)],
)
def test_relative_risk_follows_the_definition(coef, se, per, level):
    e = relative_risk(coef, se, per=per, level=level)
    z = stats.norm.ppf(0.5 + level / 2)
    assert e.rr == pytest.approx(math.exp(per * coef), rel=1e-12)
    assert e.rr_low == pytest.approx(math.exp(per * (coef - z * se)), rel=1e-12)
    assert e.rr_high == pytest.approx(math.exp(per * (coef + z * se)), rel=1e-12)
    assert e.percent_change == pytest.approx(100 * (e.rr - 1), rel=1e-12)
    assert e.p_value == pytest.approx(2 * stats.norm.sf(abs(coef) / se), rel=1e-12)
    assert e.rr_low < e.rr < e.rr_high
    # the interval is symmetric on the log scale
    assert math.log(e.rr) - math.log(e.rr_low) == pytest.approx(math.log(e.rr_high) - math.log(e.rr), rel=1e-9)


def test_p_value_and_interval_agree():
    # the 95% interval excludes 1 exactly when p < 0.05
    for coef in np.linspace(-0.002, 0.002, 41):
        e = relative_risk(float(coef), 0.0005)
        assert (e.rr_low > 1 or e.rr_high < 1) == (e.p_value < 0.05)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"per": 0.0}, "per must be a positive"),
        ({"per": -10.0}, "per must be a positive"),
        ({"per": float("nan")}, "per must be a positive"),
        ({"se": -1e-4}, "standard error"),
        ({"se": float("inf")}, "standard error"),
        ({"level": 1.0}, "confidence level"),
        ({"level": 95}, "confidence level"),
        ({"level": "0.95"}, "confidence level"),
    ],
)
def test_relative_risk_bad_arguments_are_named(kwargs, message):
    args = {"coef": 0.001, "se": 0.0004, **kwargs}
    with pytest.raises(SpecificationError, match=message):
        relative_risk(**args)


# --- effects from a fit ---------------------------------------------------------------------------


@pytest.fixture(scope="module")
def result():
    data = airhealth.load_sample()
    data = data[data["date"] < "2016-01-01"].reset_index(drop=True)
    return airhealth.fit(data, outcome="deaths_all", exposure="pm25", lag="0-1", temperature="temperature")


def test_fit_effect_is_the_textbook_rr_of_its_coefficient(result):
    e = result.effect(per=10)
    assert e.coef == result.exposure_coef == result.coef["pm25[0-1]"]
    assert e.se == pytest.approx(result.std_err["pm25[0-1]"], rel=1e-12)
    assert e.rr == pytest.approx(math.exp(10 * e.coef), rel=1e-12)
    assert e.rr_high == pytest.approx(math.exp(10 * (e.coef + 1.959964 * e.se)), rel=1e-7)
    per_iqr = result.effect(scale="iqr")
    assert per_iqr.per == pytest.approx(result.exposure_iqr)
    assert per_iqr.rr == pytest.approx(math.exp(result.exposure_iqr * e.coef), rel=1e-12)
    assert per_iqr.p_value == pytest.approx(e.p_value, rel=1e-12)  # p does not depend on the increment


def test_to_dict_has_the_cli_keys_with_consistent_values(result):
    d = result.to_dict(per=10)
    required = {"exposure", "lag", "per", "coef", "se", "rr", "rr_low", "rr_high", "percent_change", "p_value",
                "dispersion", "qaic", "n_days"}  # fmt: skip
    assert required <= set(d)
    assert (d["exposure"], d["lag"], d["per"]) == ("pm25", "0-1", 10.0)
    assert d["rr"] == pytest.approx(math.exp(10 * d["coef"]), rel=1e-12)
    assert d["n_days"] == result.n_days
    assert d["dispersion"] == result.dispersion


def test_iqr_is_that_of_the_daily_exposure_on_the_days_used(result):
    # the increment is the IQR of the daily series (not of its 0-1 mean), so every lag structure fitted on
    # the same days uses the same increment
    data = airhealth.load_sample()
    data = data[data["date"] < "2016-01-01"].reset_index(drop=True)
    used = data.set_index("date").loc[result.observed.index, "pm25"]
    q1, q3 = np.percentile(used, [25, 75])
    assert result.exposure_iqr == pytest.approx(q3 - q1, rel=1e-12)


def test_moving_average_spreads_its_coefficient_evenly_over_its_lags(result):
    rows = result.lag_effects(per=10)
    e = result.effect(per=10)
    assert len(rows) == 2  # lags 0 and 1 of the mean, each with weight 1/2
    np.testing.assert_allclose(rows["coef"], e.coef / 2, rtol=1e-12)


def test_effects_table_and_its_formatted_view(result):
    table = effects_table([result, result], per=10)
    assert len(table) == 2
    assert table.loc[0, "rr"] == pytest.approx(result.effect(per=10).rr, rel=1e-12)
    text = format_effects(table, digits=3)
    e = result.effect(per=10)
    assert text.loc[0, "RR (95% CI)"] == f"{e.rr:.3f} ({e.rr_low:.3f} to {e.rr_high:.3f})"
    assert text.loc[0, "days"] == result.n_days
