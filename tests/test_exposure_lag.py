"""Exposure–lag bases (exposure–response basis × lag basis): construction, fitting as exposure or
confounder, bad input, and a simulation with a threshold exposure–response."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from airhealth.errors import DataError, SpecificationError
from airhealth.model.bases.distributed_lags import SplineLag, UnconstrainedLag
from airhealth.model.bases.exposure_lag import (
    ExposureLagBasis,
    ExposureLagTerm,
    LinearResponse,
    SplineResponse,
    ThresholdResponse,
)
from airhealth.model.bases.splines import NaturalSplineBasis
from airhealth.model.bases.terms import Linear
from airhealth.model.fitting import fit
from airhealth.model.lag_predictions import exposure_response


def _shifted(x: np.ndarray, k: int) -> np.ndarray:
    return pd.Series(x).shift(k).to_numpy(dtype=float)


def test_columns_are_the_tensor_product_of_response_and_lag_bases():
    # Gasparrini, Armstrong & Kenward (2010), eq. for the exposure–lag basis: column (j, k) is
    # sum_l f_j(x_{t-l}) C_{lk}; built here by hand with pandas shifts.
    rng = np.random.default_rng(3)
    x = rng.gamma(4.0, 5.0, 300)
    x[[40, 41, 200]] = np.nan
    basis = ExposureLagBasis(SplineResponse(df=3), SplineLag(0, 9, 3)).bind(x)
    f = basis.response.spline.evaluate(x)
    c = basis.lag.basis()
    expected = np.column_stack(
        [sum(_shifted(f[:, j], lag) * c[i, k] for i, lag in enumerate(range(10))) for j in range(3) for k in range(3)]
    )
    got = basis.columns(x)
    assert got.shape == (300, 9)
    np.testing.assert_allclose(got, expected, rtol=1e-12, equal_nan=True)
    assert np.isnan(got[:9]).all() and np.isnan(got[40:51]).all() and np.isfinite(got[51:200]).all()
    names = basis.column_names("pm25")
    assert len(set(names)) == 9
    assert names[:2] == [
        "pm25[spline(df=3) x dl0-9:spline3]x1:lagbasis1",
        "pm25[spline(df=3) x dl0-9:spline3]x1:lagbasis2",
    ]
    assert names[-1] == "pm25[spline(df=3) x dl0-9:spline3]x3:lagbasis3"


def test_spline_response_learns_knots_from_all_non_missing_values():
    x = np.r_[np.arange(100.0), np.nan, 500.0]
    bound = SplineResponse(df=4).bind(x, "pm25")
    reference = NaturalSplineBasis.from_values(x[np.isfinite(x)], df=4)
    assert bound.spline == reference
    assert bound.summary.low == 0 and bound.summary.high == 500
    assert SplineResponse(df=4) != bound  # the fitted copy differs; the original is unchanged
    assert SplineResponse(df=4).spline is None


def test_threshold_response_values():
    above = ThresholdResponse(25).evaluate(np.array([10.0, 25.0, 30.0, np.nan]))
    np.testing.assert_array_equal(above[:, 0], [0.0, 0.0, 5.0, np.nan])
    below = ThresholdResponse(19, side="below").evaluate(np.array([-1.0, 19.0, 25.0]))
    np.testing.assert_array_equal(below[:, 0], [20.0, 0.0, 0.0])


def test_linear_exposure_lag_basis_is_the_plain_distributed_lag(sample):
    plain = fit(sample, "deaths_all", "pm25", lag="dl0-5", temperature="temperature")
    combined = fit(
        sample, "deaths_all", "pm25", lag=ExposureLagBasis(LinearResponse(), "dl0-5"), temperature="temperature"
    )
    np.testing.assert_allclose(combined.coef.to_numpy(), plain.coef.to_numpy(), rtol=1e-10)
    assert combined.effect(per=10).rr == pytest.approx(plain.effect(per=10).rr, rel=1e-12)
    for ours, theirs in zip(combined.to_dict()["lags"], plain.to_dict()["lags"], strict=True):
        assert ours == pytest.approx(theirs, rel=1e-9)


@pytest.fixture(scope="module")
def spline_fit(_sample_once):
    return fit(
        _sample_once,
        "deaths_all",
        "pm25",
        lag=ExposureLagBasis(SplineResponse(df=3), "dl0-5"),
        temperature="temperature",
    )


def test_fitted_result_keeps_the_bound_exposure_lag_basis(spline_fit, _sample_once):
    lag = spline_fit.spec.lag
    assert lag.is_bound and lag.is_nonlinear
    pm = _sample_once["pm25"].to_numpy(dtype=float)
    assert lag.response.spline == NaturalSplineBasis.from_values(pm, df=3)  # whole period, not days used
    assert len(spline_fit.exposure_columns) == 3 * 6
    assert "non-linear exposure-response" in repr(spline_fit)
    assert spline_fit._repr_html_() is None


def test_effect_per_unit_of_a_non_linear_term_points_to_the_prediction_functions(spline_fit):
    for call in (spline_fit.effect, spline_fit.to_dict, spline_fit.lag_coefficients):
        with pytest.raises(SpecificationError, match=r"no single effect per unit; use .*exposure_response"):
            call()


def test_temperature_exposure_lag_term_as_confounder_equals_its_columns_entered_by_hand(sample):
    term = ExposureLagTerm("temperature", SplineResponse(df=4), SplineLag(0, 10, 3))
    auto = fit(sample, "deaths_all", "pm25", lag="0-1", confounders=[term])
    basis = term.exposure_lag_basis.bind(sample["temperature"].to_numpy(dtype=float))
    cols = basis.columns(sample["temperature"].to_numpy(dtype=float))
    data = sample.assign(**{f"t{i}": cols[:, i] for i in range(cols.shape[1])})
    by_hand = fit(data, "deaths_all", "pm25", lag="0-1", confounders=[Linear(f"t{i}") for i in range(cols.shape[1])])
    assert auto.n_days == by_hand.n_days
    assert auto.exposure_coef == pytest.approx(by_hand.exposure_coef, rel=1e-9)
    assert auto.exposure_se == pytest.approx(by_hand.exposure_se, rel=1e-9)
    assert auto.bases[term.name] == basis
    # the first 10 days lack a full temperature history (day 0 is reported for the exposure's own lag)
    first = auto.dropped.set_index("date")["reason"].reindex(sample["date"].iloc[:10])
    assert first.iloc[0] == "lag window starts before the first day"
    assert (first.iloc[1:] == f"{term.name} missing").all()


# ---------------------------------------------------------------------------------------- bad input


@pytest.mark.parametrize(
    ("make", "error", "words"),
    [
        (lambda: ExposureLagBasis("spline", "dl0-5"), SpecificationError, "response must be"),
        (
            lambda: ExposureLagBasis(LinearResponse(), ExposureLagBasis()),
            SpecificationError,
            "not another exposure-lag basis",
        ),
        (lambda: ExposureLagBasis(LinearResponse(), "dl-2-5"), SpecificationError, "cannot be negative"),
        (lambda: SplineResponse(df=0), SpecificationError, "df must be a whole number >= 1"),
        (lambda: SplineResponse(knots=(5, 3)), SpecificationError, "must be increasing"),
        (lambda: ThresholdResponse(25, side="over"), SpecificationError, "side"),
        (lambda: ThresholdResponse(float("nan")), SpecificationError, "finite number"),
        (lambda: SplineResponse(df=3).evaluate(np.arange(5.0)), SpecificationError, "bind it to the exposure"),
        (
            lambda: ThresholdResponse(80).bind(np.arange(50.0), "pm25"),
            DataError,
            "outside the observed range of 'pm25'",
        ),
        (lambda: SplineResponse(knots=(10, 60)).bind(np.arange(50.0), "pm25"), DataError, "inside the observed range"),
        (lambda: SplineResponse(df=5).bind(np.array([1.0, 2, 1, 2, 3]), "o3"), DataError, "too few distinct values"),
        (lambda: LinearResponse().bind(np.full(10, np.nan), "no2"), DataError, "two distinct non-missing"),
    ],
)
def test_bad_exposure_lag_input_names_the_problem(make, error, words):
    with pytest.raises(error) as err:
        make()
    assert words in str(err.value)


def test_threshold_outside_the_exposure_range_fails_at_fit_naming_the_column(sample):
    with pytest.raises(DataError, match=r"threshold 500 is outside the observed range of 'pm25'"):
        fit(sample, "deaths_all", "pm25", lag=ExposureLagBasis(ThresholdResponse(500), "dl0-3"))


# ------------------------------------------------------------ simulation: threshold exposure–response


THRESHOLD, WEIGHTS = 25.0, np.array([0.4, 0.3, 0.2, 0.1])


def simulate_threshold(seed: int, years: float = 4, rr_per_10_above: float = 1.06):
    """Invented daily counts whose log rate rises linearly with PM above 25 µg/m³, the effect spread over
    lags 0-3 with weights 0.4, 0.3, 0.2, 0.1; no effect below the threshold."""
    rng = np.random.default_rng(seed)
    n = round(365.25 * years)
    t = np.arange(n + 3)
    noise = rng.standard_normal(t.size)
    ar = np.zeros(t.size)
    for i in range(1, t.size):
        ar[i] = 0.6 * ar[i - 1] + 0.8 * noise[i]
    pm = np.round(np.exp(np.log(18) + 0.2 * np.cos(2 * np.pi * t / 365.25) + 0.45 * ar), 1)
    gamma = np.log(rr_per_10_above) / 10
    excess = np.maximum(pm - THRESHOLD, 0.0)
    effect = sum(gamma * w * excess[3 - k : 3 - k + n] for k, w in enumerate(WEIGHTS))
    day = t[3:]
    log_mu = np.log(50.0) + 0.1 * np.cos(2 * np.pi * (day - 20) / 365.25) + effect - effect.mean()
    frame = pd.DataFrame({"date": pd.date_range("2016-01-01", periods=n), "deaths": rng.poisson(np.exp(log_mu))})
    frame["pm"] = pm[3:]
    return frame, 20 * gamma  # true cumulative log RR of 45 against 25 µg/m³


def _threshold_run(seeds) -> tuple[np.ndarray, np.ndarray, float]:
    est, cover = [], []
    lag = ExposureLagBasis(ThresholdResponse(THRESHOLD), UnconstrainedLag(0, 3))
    for seed in seeds:
        frame, truth = simulate_threshold(seed)
        result = fit(frame, "deaths", "pm", lag=lag, trend_df_per_year=4, day_of_week=False)
        row = exposure_response(result, values=[45.0], reference=25.0).iloc[0]
        est.append(row["coef"])
        cover.append(np.log(row["rr_low"]) < truth < np.log(row["rr_high"]))
    return np.array(est), np.array(cover), truth


def test_simulated_threshold_effect_is_recovered_small_run():
    # 20 replicates; one estimate has SE ≈ 0.02 (log RR, 45 vs 25 µg/m³), so the mean of 20 lies within
    # 0.015 of the truth (about 3 SE of the mean); at least 17/20 intervals cover (P(<= 16) ≈ 0.016).
    est, cover, truth = _threshold_run(range(20))
    assert abs(est.mean() - truth) < 0.015
    assert cover.sum() >= 17


@pytest.mark.slow
def test_simulated_threshold_effect_coverage_is_near_nominal():
    est, cover, truth = _threshold_run(range(500, 900))
    assert abs(est.mean() - truth) < 0.004  # SE of the mean ≈ 0.001
    assert 0.925 <= cover.mean() <= 0.975  # binomial SD ≈ 0.011 for 400 replicates


def test_spline_exposure_response_sees_the_threshold():
    # A flexible (spline) exposure-response on the same data: the cumulative curve is flat below the
    # threshold and rises above it. Pooled over 6 long replicates to keep noise small; a shape check.
    low, high = [], []
    for seed in range(6):
        frame, truth = simulate_threshold(seed, years=8)
        lag = ExposureLagBasis(SplineResponse(knots=(15.0, 25.0, 35.0)), UnconstrainedLag(0, 3))
        result = fit(frame, "deaths", "pm", lag=lag, trend_df_per_year=4, day_of_week=False)
        curve = exposure_response(result, values=[10.0, 45.0], reference=25.0)
        low.append(curve["coef"].iloc[0])
        high.append(curve["coef"].iloc[1])
    assert abs(np.mean(low)) < 0.02
    assert np.mean(high) == pytest.approx(truth, abs=0.3 * truth)
