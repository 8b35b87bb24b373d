"""Attributable numbers and fractions against the published formula, computed independently here.

Source of the formula: Gasparrini A, Leone M (2014). Attributable risk from distributed lag models. BMC Med Res
Methodol 14:55 — AN = Σ_t n_t (1 − exp(−β_x,t)) with β_x,t the log relative risk of day t's exposure against the
counterfactual x0; AF = AN / Σ_t n_t. Backward perspective: β summed over the lags of the exposures before day t;
forward perspective: day t's exposure at every lag, times the mean count over the lag window after t (their
equation for f-AN, from memory of the paper: the mean of n_{t+l0}..n_{t+L}).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.burden import burden, burden_from_estimate, burden_pooled
from airhealth.burden.excess import lag_rows
from airhealth.burden.simulation import simulate
from airhealth.errors import DataWarning
from airhealth.model.bases.exposure_lag import ExposureLagBasis, LinearResponse, SplineResponse
from airhealth.model.lag_predictions import exposure_response

# Sums of a few thousand terms in another order: agreement to 1e-10 relative (floating-point rounding only).
RTOL = 1e-10


def _city(seed: int = 3, days: int = 730) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    dates = pd.date_range("2015-01-01", periods=days, freq="D")
    season = np.cos(2 * np.pi * np.arange(days) / 365.25)
    pm = np.exp(rng.normal(2.6 + 0.3 * season, 0.45))
    deaths = rng.poisson(30 + 5 * season)
    return pd.DataFrame({"date": dates, "deaths": deaths, "pm": pm})


def _hand_single(y: np.ndarray, x: np.ndarray, beta: float, x0: float) -> tuple[float, float]:
    an = total = 0.0
    for yt, xt in zip(y, x, strict=True):
        if math.isnan(xt) or math.isnan(yt):
            continue
        an += yt * (1 - math.exp(-beta * max(xt - x0, 0.0)))
        total += yt
    return an, an / total


def test_single_day_burden_equals_the_published_formula() -> None:
    data = _city()
    b = burden_from_estimate(data, "deaths", "pm", coef=0.0008, se=0.0003, counterfactual=15, lag="0")
    an, af = _hand_single(data["deaths"].to_numpy(float), data["pm"].to_numpy(), 0.0008, 15.0)
    assert b.attributable == pytest.approx(an, rel=RTOL)
    assert b.fraction == pytest.approx(af, rel=RTOL)
    assert b.n_days == len(data)


def test_moving_average_burden_uses_the_mean_over_the_window() -> None:
    data = _city()
    b = burden_from_estimate(data, "deaths", "pm", coef=0.001, se=0.0004, counterfactual=12, lag="0-2")
    mean = data["pm"].rolling(3).mean().to_numpy()  # pandas: mean of lags 0..2, missing for the first 2 days
    an, af = _hand_single(data["deaths"].to_numpy(float), mean, 0.001, 12.0)
    assert b.attributable == pytest.approx(an, rel=RTOL)
    assert b.fraction == pytest.approx(af, rel=RTOL)
    assert b.n_days == len(data) - 2
    assert b.missing_exposure_days() == {"n": 2, "first": "2015-01-01", "last": "2015-01-02"}


def test_days_with_missing_exposure_are_reported_not_counted_as_zero_excess() -> None:
    data = _city()
    data.loc[100:109, "pm"] = np.nan
    b = burden_from_estimate(data, "deaths", "pm", coef=0.0008, se=0.0003, counterfactual=10)
    an, af = _hand_single(data["deaths"].to_numpy(float), data["pm"].to_numpy(), 0.0008, 10.0)
    assert b.attributable == pytest.approx(an, rel=RTOL)
    assert b.fraction == pytest.approx(af, rel=RTOL)  # the missing days leave the denominator too
    assert b.n_days == len(data) - 10
    assert b.missing_exposure_days() == {"n": 10, "first": "2015-04-11", "last": "2015-04-20"}
    assert b.to_dict()["missing_exposure_days"]["n"] == 10


def test_no_exposure_above_the_counterfactual_gives_zero_and_says_so() -> None:
    data = _city()
    with pytest.warns(DataWarning, match=r"no day's exposure is above the counterfactual 500 µg/m³.*is 0"):
        b = burden_from_estimate(data, "deaths", "pm", coef=0.001, se=0.0004, counterfactual=500)
    d = b.to_dict()
    assert (d["attributable"], d["attributable_low"], d["attributable_high"]) == (0.0, 0.0, 0.0)
    assert (d["fraction"], d["fraction_low"], d["fraction_high"]) == (0.0, 0.0, 0.0)
    assert any("attributable number is 0" in n for n in d["notes"])


def test_monte_carlo_width_agrees_with_the_delta_method_for_a_small_coefficient() -> None:
    # For small β, AN is nearly linear in β, so its distribution is nearly normal and the percentile interval
    # approaches AN ± z SE (delta method). Tolerance 3%: with 20,000 draws the sampling error of each 2.5% or
    # 97.5% percentile is about 0.02 SD (sqrt(p(1-p)/S)/φ(z)), i.e. under 1% of the width, plus the small
    # curvature of 1 − exp(−βz).
    data = _city()
    b = burden_from_estimate(data, "deaths", "pm", coef=0.0005, se=0.0002, counterfactual=10, draws=20_000)
    mc = b.attributable_high - b.attributable_low
    delta = b.delta_high - b.delta_low
    assert mc == pytest.approx(delta, rel=0.03)


def test_delta_method_standard_error_equals_a_numerical_derivative() -> None:
    data = _city()
    beta, se, x0 = 0.002, 0.0007, 10.0
    b = burden_from_estimate(data, "deaths", "pm", coef=beta, se=se, counterfactual=x0)
    y, x = data["deaths"].to_numpy(float), data["pm"].to_numpy()
    h = 1e-6  # central difference; AN is smooth in β, error O(h²)
    slope = (_hand_single(y, x, beta + h, x0)[0] - _hand_single(y, x, beta - h, x0)[0]) / (2 * h)
    half = (b.delta_high - b.delta_low) / 2
    assert half == pytest.approx(1.959963984540054 * abs(slope) * se, rel=1e-6)


def test_same_seed_same_interval_other_seed_other_interval() -> None:
    data = _city()
    kw = {"coef": 0.0008, "se": 0.0003, "counterfactual": 15}
    a = burden_from_estimate(data, "deaths", "pm", **kw)
    b = burden_from_estimate(data, "deaths", "pm", **kw)
    c = burden_from_estimate(data, "deaths", "pm", **kw, seed=7)
    assert (a.attributable_low, a.attributable_high) == (b.attributable_low, b.attributable_high)
    assert a.attributable_low != c.attributable_low
    assert a.attributable == c.attributable  # the estimate does not depend on the draws
    assert a.to_dict()["draws"] == 1000 and c.to_dict()["seed"] == 7


def test_breakdowns_add_up_to_the_total() -> None:
    data = _city()
    b = burden_from_estimate(data, "deaths", "pm", coef=0.0008, se=0.0003, counterfactual=15)
    for by in ("year", "season", "month", "year_month"):
        table = b.table(by)
        assert table["attributable"].sum() == pytest.approx(b.attributable, rel=1e-12)
        assert table["days"].sum() == b.n_days
        assert (table["attributable_low"] <= table["attributable"]).all()
    seasons = b.table("season")
    assert list(seasons["period"]) == ["Dec-Feb", "Mar-May", "Jun-Aug", "Sep-Nov"]
    winter = data[data["date"].dt.month.isin([12, 1, 2])]
    an, _ = _hand_single(winter["deaths"].to_numpy(float), winter["pm"].to_numpy(), 0.0008, 15.0)
    assert seasons["attributable"].iloc[0] == pytest.approx(an, rel=RTOL)


def test_distributed_lag_small_example_by_hand_both_perspectives() -> None:
    # Six days, lags 0-1 unconstrained (C = I), β = (0.1, 0.05), x0 = 10.
    dates = pd.date_range("2020-01-01", periods=6, freq="D")
    x = np.array([12.0, 8.0, 15.0, 10.0, 11.0, 20.0])
    y = np.array([5.0, 6.0, 4.0, 7.0, 3.0, 8.0])
    beta = np.array([0.1, 0.05])
    basis = ExposureLagBasis(LinearResponse(), "dl0-1")
    # backward: day t gets 0.1 (x_t − 10)+ + 0.05 (x_{t−1} − 10)+; day 1 has no lag-1 exposure (left out)
    back = lag_rows(dates, x, y, basis, 10.0, "above", "backward")
    excess = {
        1: 0.1 * 0 + 0.05 * 2,
        2: 0.1 * 5 + 0.05 * 0,
        3: 0.1 * 0 + 0.05 * 5,
        4: 0.1 * 1 + 0,
        5: 0.1 * 10 + 0.05 * 1,
    }
    hand_back = sum(y[t] * (1 - math.exp(-e)) for t, e in excess.items())
    sim = simulate(back.rows, back.cases, np.array([0]), beta, np.eye(2) * 1e-6, 100, 1)
    assert sim.point.sum() == pytest.approx(hand_back, rel=1e-12)
    assert list(back.left_out["reason"]) == ["lag window starts before the first day"]
    # forward: day t's exposure at both lags, (0.1 + 0.05)(x_t − 10)+, times the mean of y_t, y_{t+1}
    fwd = lag_rows(dates, x, y, basis, 10.0, "above", "forward")
    hand_fwd = sum(
        (1 - math.exp(-0.15 * max(x[t] - 10, 0))) * (y[t] + y[t + 1]) / 2 for t in range(5)
    )  # day 6 has no following day: left out
    sim = simulate(fwd.rows, fwd.cases, np.array([0]), beta, np.eye(2) * 1e-6, 100, 1)
    assert sim.point.sum() == pytest.approx(hand_fwd, rel=1e-12)
    assert list(fwd.left_out["reason"]) == ["lag window ends after the last day"]


def _hand_distributed(y: np.ndarray, x: np.ndarray, betas: np.ndarray, x0: float, forward: bool) -> float:
    n, lags = len(x), len(betas)
    total = 0.0
    for t in range(n):
        if forward:
            if t + lags - 1 >= n or math.isnan(x[t]) or any(math.isnan(y[t + k]) for k in range(lags)):
                continue
            rr = sum(betas) * max(x[t] - x0, 0.0)
            total += (1 - math.exp(-rr)) * sum(y[t + k] for k in range(lags)) / lags
        else:
            if t - lags + 1 < 0 or any(math.isnan(x[t - k]) for k in range(lags)) or math.isnan(y[t]):
                continue
            rr = sum(betas[k] * max(x[t - k] - x0, 0.0) for k in range(lags))
            total += y[t] * (1 - math.exp(-rr))
    return total


@pytest.mark.parametrize("perspective", ["backward", "forward"])
def test_fitted_distributed_lag_burden_equals_the_hand_sum_over_lags(sample: pd.DataFrame, perspective: str) -> None:
    fitted = airhealth.fit(sample, "deaths_all", "pm25", lag="dl0-3:poly2", temperature="temperature")
    betas = fitted.lag_coefficients()["coef"].to_numpy()  # β_l = C θ
    b = burden(fitted, 10, data=sample, perspective=perspective)
    y, x = sample["deaths_all"].to_numpy(float), sample["pm25"].to_numpy(float)
    assert b.attributable == pytest.approx(_hand_distributed(y, x, betas, 10.0, perspective == "forward"), rel=RTOL)


def test_fitted_single_lag_burden_from_its_own_days_or_the_data(sample: pd.DataFrame) -> None:
    fitted = airhealth.fit(sample, "deaths_all", "pm25", lag="1", temperature="temperature")
    own = burden(fitted, 15)
    y = fitted.observed.to_numpy(float)
    x = sample.set_index("date")["pm25"].shift(1).reindex(fitted.observed.index).to_numpy()
    an, af = _hand_single(y, x, fitted.exposure_coef, 15.0)
    assert own.attributable == pytest.approx(an, rel=RTOL)
    assert own.fraction == pytest.approx(af, rel=RTOL)
    given = burden(fitted, 15, data=sample)  # every day with exposure and outcome, not only the fit's days
    an_all, _ = _hand_single(
        sample["deaths_all"].to_numpy(float), sample["pm25"].shift(1).to_numpy(), fitted.exposure_coef, 15.0
    )
    assert given.attributable == pytest.approx(an_all, rel=RTOL)


def test_non_linear_curve_burden_above_the_minimum_equals_the_predicted_relative_risks(sample: pd.DataFrame) -> None:
    basis = ExposureLagBasis(SplineResponse(df=3), "0")
    fitted = airhealth.fit(sample, "deaths_all", "temperature", lag=basis, temperature=None, unit="°C")
    b = burden(fitted, "minimum-risk", data=sample, side="above")
    x0 = b.counterfactual.value
    x = sample["temperature"].to_numpy(float)
    y = sample["deaths_all"].to_numpy(float)
    hot = np.isfinite(x) & np.isfinite(y) & (x > x0)
    log_rr = exposure_response(fitted, values=x[hot], reference=x0)["coef"].to_numpy()  # the curve's own prediction
    assert b.attributable == pytest.approx(float(np.sum(y[hot] * (1 - np.exp(-log_rr)))), rel=1e-9)
    cold = burden(fitted, x0, data=sample, side="below")
    both = burden(fitted, x0, data=sample, side="both")
    assert both.attributable == pytest.approx(b.attributable + cold.attributable, rel=1e-9)


def test_pooled_estimate_applied_to_each_city_shares_its_draws() -> None:
    cities = {"north": _city(1), "south": _city(2)}
    estimates = pd.DataFrame({"city": ["a", "b", "c"], "coef": [0.0006, 0.001, 0.0008], "se": [0.0003, 0.0004, 0.0002]})
    pooled = airhealth.pool(estimates)
    b = burden_pooled(pooled, cities, "deaths", "pm", 15, lag="0", unit="µg/m³")  # a hand-made table records none
    per_city = b.table("city").set_index("period")
    for name, data in cities.items():
        alone = burden_from_estimate(data, "deaths", "pm", coef=pooled.coef, se=pooled.se, counterfactual=15)
        assert per_city.loc[name, "attributable"] == pytest.approx(alone.attributable, rel=RTOL)
        assert per_city.loc[name, "attributable_low"] == pytest.approx(alone.attributable_low, rel=1e-9)  # same draws
    assert b.attributable == pytest.approx(per_city["attributable"].sum(), rel=1e-12)
    assert "pooled estimate" in b.to_dict()["coefficients_from"]


def test_every_output_carries_the_caution(sample: pd.DataFrame) -> None:
    fitted = airhealth.fit(sample, "deaths_all", "pm25", lag="0-1", temperature="temperature")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        b = burden(fitted, "who-guideline:pm2.5:24h")
    assert "causal" in b.to_dict()["caution"] and "achieved" in b.to_dict()["caution"]
    assert "causal" in b._repr_html_()
    assert "causal" in b.table("year").attrs["caution"]
    d = b.to_dict()
    for key in (
        "attributable",
        "attributable_low",
        "attributable_high",
        "fraction",
        "fraction_low",
        "fraction_high",
        "n_days",
    ):
        assert key in d
    assert d["counterfactual"] == 15 and d["counterfactual_name"] == "who-guideline:pm2.5:24h"


def test_non_linear_distributed_lag_burden_equals_the_per_lag_predictions(sample: pd.DataFrame) -> None:
    # backward: day t's log RR = Σ_l (f(x_{t-l}) - f(x0)) Θ C_l over the lags whose exposure is above x0,
    # each term taken from exposure_response(per_lag=True), the model layer's own prediction code
    basis = ExposureLagBasis(SplineResponse(df=3), "dl0-3:poly2")
    fitted = airhealth.fit(sample, "deaths_all", "temperature", lag=basis, temperature=None, unit="°C")
    x0 = 20.0
    b = burden(fitted, x0, data=sample, side="above")
    x = sample["temperature"].to_numpy(float)
    y = sample["deaths_all"].to_numpy(float)
    hot = np.unique(x[np.isfinite(x) & (x > x0)])
    table = exposure_response(fitted, values=hot, reference=x0, per_lag=True)
    log_rr = {(v, int(k)): c for v, k, c in table[["exposure", "lag", "coef"]].itertuples(index=False)}
    expected = 0.0
    for t in range(3, len(x)):
        window = x[t - 3 : t + 1][::-1]  # x_t, x_{t-1}, x_{t-2}, x_{t-3}
        if not np.isfinite(window).all() or not np.isfinite(y[t]):
            continue
        total = sum(log_rr[(v, k)] for k, v in enumerate(window) if v > x0)
        expected += y[t] * (1 - math.exp(-total))
    assert b.attributable == pytest.approx(expected, rel=1e-9)


def test_minimum_risk_counterfactual_needs_a_non_linear_curve(sample: pd.DataFrame) -> None:
    from airhealth.errors import SpecificationError

    fitted = airhealth.fit(sample, "deaths_all", "pm25", lag="0")
    with pytest.raises(SpecificationError, match=r"'minimum-risk' needs a non-linear exposure-response"):
        burden(fitted, "minimum-risk")


def test_pooled_distributed_lag_vector_applied_to_each_city_equals_the_hand_sum() -> None:
    # dl0-2 unconstrained: the pooled vector is the per-lag coefficients themselves (C = I)
    coefs = [[0.0006, 0.0003, 0.0001], [0.0008, 0.0002, 0.0], [0.0005, 0.0004, 0.0002]]
    covs = [np.diag([1e-8, 1e-8, 1e-8])] * 3
    pooled = airhealth.pool_multivariate(coefs, covs, method="mm")
    cities = {"north": _city(1), "south": _city(2)}
    b = burden_pooled(pooled, cities, "deaths", "pm", 12, lag="dl0-2", unit="µg/m³")
    expected = sum(
        _hand_distributed(d["deaths"].to_numpy(float), d["pm"].to_numpy(), np.asarray(pooled.coef), 12.0, False)
        for d in cities.values()
    )
    assert b.attributable == pytest.approx(expected, rel=RTOL)
    forward = burden_pooled(pooled, cities, "deaths", "pm", 12, lag="dl0-2", unit="µg/m³", perspective="forward")
    expected_fwd = sum(
        _hand_distributed(d["deaths"].to_numpy(float), d["pm"].to_numpy(), np.asarray(pooled.coef), 12.0, True)
        for d in cities.values()
    )
    assert forward.attributable == pytest.approx(expected_fwd, rel=RTOL)
    from airhealth.errors import SpecificationError

    with pytest.raises(SpecificationError, match=r"pooled vector has 3 coefficients but lag dl0-5 has 6 basis columns"):
        burden_pooled(pooled, cities, "deaths", "pm", 12, lag="dl0-5", unit="µg/m³")


def test_pooled_burden_takes_the_lag_and_unit_the_cities_were_fitted_with() -> None:
    # review defect: burden_pooled applied a 0-1 pooled coefficient at lag 0 by default
    from airhealth.errors import SpecificationError

    cities = {"north": _city(1), "south": _city(2), "east": _city(4)}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        table = airhealth.fit_cities(cities, outcome="deaths", exposure="pm", lag="0-1", temperature=None,
                                     show_progress=False)  # fmt: skip
    assert (table.attrs["lag"], table.attrs["unit"]) == ("0-1", "µg/m³")
    pooled = airhealth.pool(table)
    assert (pooled.lag, pooled.unit) == ("0-1", "µg/m³")
    b = burden_pooled(pooled, cities, "deaths", "pm", 15)
    assert b.lag == "0-1"
    alone = sum(
        burden_from_estimate(d, "deaths", "pm", pooled.coef, pooled.se, 15, lag="0-1").attributable
        for d in cities.values()
    )
    assert b.attributable == pytest.approx(alone, rel=RTOL)
    with pytest.raises(SpecificationError, match=r"lag='0' but the pooled coefficient is for lag '0-1'"):
        burden_pooled(pooled, cities, "deaths", "pm", 15, lag="0")
    with pytest.raises(SpecificationError, match=r"unit='ppb' but the pooled coefficient is per µg/m³"):
        burden_pooled(pooled, cities, "deaths", "pm", 15, unit="ppb")
    by_hand = airhealth.pool(pd.DataFrame(table[["city", "coef", "se"]].to_dict("list")))
    with pytest.raises(SpecificationError, match=r"does not record the lag .* give lag=\.\.\."):
        burden_pooled(by_hand, cities, "deaths", "pm", 15)
    with pytest.raises(SpecificationError, match=r"does not record the exposure's unit.*give unit="):
        burden_pooled(by_hand, cities, "deaths", "pm", 15, lag="0-1")


def test_pooled_lag_vectors_carry_the_lag_of_the_cities() -> None:
    from airhealth.cities import lag_vectors

    cities = {"north": _city(1), "south": _city(2), "east": _city(4)}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        table = airhealth.fit_cities(cities, outcome="deaths", exposure="pm", lag="dl0-2", temperature=None,
                                     show_progress=False)  # fmt: skip
    pooled = airhealth.pool_multivariate(*lag_vectors(table), method="mm")
    assert (pooled.lag, pooled.unit) == ("dl0-2", "µg/m³")
    assert burden_pooled(pooled, cities, "deaths", "pm", 12).lag == "dl0-2"
