"""Distributed lag structures: objects and strings, bases, equivalence with ordinary GLMs, bad input, and a
simulation with a known lag profile."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from numpy.polynomial import polynomial
from threadpoolctl import threadpool_limits

from airhealth.errors import DataError, SpecificationError
from airhealth.model.bases.distributed_lags import PolynomialLag, SplineLag, UnconstrainedLag, parse_distributed_lag
from airhealth.model.bases.lag_structures import parse_lag
from airhealth.model.design import build_design, model_frame
from airhealth.model.fitting import fit
from airhealth.model.spec import ModelSpec

# ------------------------------------------------------------------------------------ objects, strings


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("dl0-5", UnconstrainedLag(0, 5)),
        ("DL 1-4", UnconstrainedLag(1, 4)),
        ("dl0-7:poly3", PolynomialLag(0, 7, 3)),
        ("dl0-21:spline4", SplineLag(0, 21, 4)),
        ("dl0-21:spline5:log", SplineLag(0, 21, 5, knot_spacing="log")),
        ("dl0-21:spline:knots=2,5,10", SplineLag(0, 21, knots=(2, 5, 10))),
    ],
)
def test_strings_parse_to_objects_whose_label_is_the_string(text, expected):
    obj = parse_lag(text)
    assert obj == expected
    assert obj.is_distributed
    assert parse_distributed_lag(obj.label) == obj
    assert ModelSpec("y", "x", lag=text).lag == expected


def test_lags_and_basis_shapes():
    assert UnconstrainedLag(2, 5).lags.tolist() == [2, 3, 4, 5]
    assert np.array_equal(UnconstrainedLag(0, 5).basis(), np.eye(6))
    assert PolynomialLag(0, 7, 3).basis().shape == (8, 4)
    assert SplineLag(0, 21, 4).basis().shape == (22, 4)
    assert SplineLag(0, 21, 4).max_lag == 21
    assert SplineLag(0, 21, knots=(3.0, 8.0, 15.0)).n_columns == 5


def test_polynomial_basis_spans_the_vandermonde_matrix_of_the_lags():
    # Almon (1965): the per-lag coefficients lie on a polynomial of degree d in the lag, i.e. in the column
    # space of the Vandermonde matrix [1, l, ..., l^d]. Our Legendre basis must span exactly that space.
    lag = PolynomialLag(2, 9, 3)
    c = lag.basis()
    vander = polynomial.polyvander(lag.lags.astype(float), 3)
    coef, *_ = np.linalg.lstsq(c, vander, rcond=None)
    np.testing.assert_allclose(c @ coef, vander, rtol=0, atol=1e-9)  # raw powers up to 729: abs 1e-9
    assert np.linalg.matrix_rank(c) == 4
    assert np.linalg.cond(c) < 10  # well conditioned, unlike raw powers
    assert np.linalg.cond(vander) > 1000


def test_full_degree_polynomial_and_full_df_spline_reproduce_the_unconstrained_lag():
    for lag in (PolynomialLag(0, 5, 5), SplineLag(0, 5, 6)):
        assert np.linalg.matrix_rank(lag.basis()) == 6


def test_spline_lag_knots_equal_and_log_spaced():
    assert SplineLag(0, 21, 4).interior_knots == pytest.approx((7.0, 14.0))
    assert SplineLag(3, 15, 5).interior_knots == pytest.approx((6.0, 9.0, 12.0))
    # log scale: equally spaced in log(1 + lag - first); for 0-21 and 4 df: exp(log(22)/3) - 1 = 1.802...
    log_spaced = np.array(SplineLag(0, 21, 4, knot_spacing="log").interior_knots)
    assert log_spaced == pytest.approx(np.exp(np.log(22) * np.array([1, 2]) / 3) - 1, rel=1e-12)
    assert np.diff(np.log1p(np.r_[0.0, log_spaced, 21.0])) == pytest.approx([np.log(22) / 3] * 3)


def test_spline_lag_basis_spans_constants_and_two_df_is_a_straight_line():
    c = SplineLag(0, 21, 4).basis()
    coef, *_ = np.linalg.lstsq(c, np.ones(22), rcond=None)
    np.testing.assert_allclose(c @ coef, 1.0, atol=1e-12)
    line = SplineLag(0, 10, 2).basis()
    target = np.column_stack([np.ones(11), np.arange(11.0)])
    coef, *_ = np.linalg.lstsq(line, target, rcond=None)
    np.testing.assert_allclose(line @ coef, target, atol=1e-12)


# ---------------------------------------------------------------------------------------- bad input


@pytest.mark.parametrize(
    ("make", "words"),
    [
        (lambda: parse_lag("dl-1-5"), "cannot be negative"),
        (lambda: UnconstrainedLag(-2, 3), "cannot be negative"),
        (lambda: parse_lag("dl0--3"), "cannot be negative"),
        (lambda: parse_lag("dl0-3:spline5"), "more df than lags"),
        (lambda: SplineLag(0, 3, 5), "more df than lags"),
        (lambda: SplineLag(0, 4, knots=(1, 2, 3, 3.5)), "more df than lags"),
        (lambda: parse_lag("dl0-3:poly4"), "more parameters (5) than lags (4)"),
        (lambda: PolynomialLag(0, 2, 3), "more parameters"),
        (lambda: parse_lag("dl3-3"), "last lag after the first"),
        (lambda: UnconstrainedLag(5, 2), "last lag after the first"),
        (lambda: SplineLag(0, 21, 1), "df must be a whole number >= 2"),
        (lambda: SplineLag(0, 21, knots=(5, 25)), "strictly inside lags 0-21"),
        (lambda: SplineLag(0, 21, 4, knots=(5, 10, 15)), "not df=4"),
        (lambda: UnconstrainedLag(0, 2.5), "whole numbers of days"),
        (lambda: parse_lag("dl0-21:spline"), "give the spline df"),
        (lambda: parse_lag("dl0-5:cubic"), "not understood"),
    ],
)
def test_bad_lag_specifications_name_the_problem(make, words):
    with pytest.raises(SpecificationError) as err:
        make()
    assert words in str(err.value)


def test_lag_range_longer_than_the_series_is_refused(sample):
    short = sample.iloc[:30]
    with pytest.raises(SpecificationError, match=r"lag dl0-40 reaches back 40 days but the series has only 30"):
        fit(short, "deaths_all", "pm25", lag="dl0-40", trend_df_per_year=1)


def test_lag_range_leaving_too_few_days_is_refused(sample):
    short = sample.iloc[:60]
    with pytest.raises(DataError, match=r"too few usable days .* lag window starts before the first day"):
        fit(short, "deaths_all", "pm25", lag="dl0-50", trend_df_per_year=4)


def test_missing_exposure_inside_a_lag_window_drops_the_days_it_reaches(sample):
    # documented handling: complete cases only; a missing day t removes days t..t+max_lag from the fit
    data = sample.iloc[:400].copy()
    data["pm25"] = data["pm25"].interpolate().bfill()  # start from a complete series
    data.loc[200, "pm25"] = np.nan
    before = sample.copy()
    result = fit(data, "deaths_all", "pm25", lag="dl0-5", trend_df_per_year=4)
    reasons = result.dropped.set_index("date")["reason"]
    day = data.loc[200, "date"]
    assert reasons[day] == "exposure missing"
    window = pd.date_range(day + pd.Timedelta(days=1), periods=5)
    assert (reasons[window] == "exposure missing in lag window").all()
    assert day + pd.Timedelta(days=6) not in reasons.index
    assert (reasons == "lag window starts before the first day").sum() == 5
    assert result.n_days == 400 - 5 - 6
    pd.testing.assert_frame_equal(sample, before)  # the caller's frame is untouched


# ------------------------------------------------------------------ equivalence with ordinary GLMs


@pytest.fixture(scope="module")
def frame_and_spec(_sample_once):
    # the first six years of the sample keep the statsmodels fits quick
    spec = ModelSpec("deaths_all", "pm25", lag="dl0-7:poly3", temperature="temperature")
    return model_frame(_sample_once.iloc[: 6 * 365], spec), spec


def _lag_columns(series: pd.Series, lags: np.ndarray) -> np.ndarray:
    """Explicit lag columns built with pandas (independent of airhealth's lag code)."""
    return np.column_stack([series.shift(int(k)).to_numpy(dtype=float) for k in lags])


def _statsmodels_curve(frame, spec, lag, c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Fit a quasi-Poisson GLM in statsmodels on confounders + Q C; return the per-lag curve and SEs."""
    design = build_design(frame, spec.replace(lag=lag))
    conf = design.confounders.matrix[design.used]
    xq = _lag_columns(frame["pm25"], lag.lags)[design.used] @ c
    model = sm.GLM(design.response, np.hstack([conf, xq]), family=sm.families.Poisson())
    with threadpool_limits(1):  # statsmodels' IRLS (pinv per step) is far slower with competing BLAS threads
        res = model.fit(scale="X2", tol=1e-11, maxiter=200)
    assert res.converged
    k = c.shape[1]
    theta, v = res.params[-k:], res.cov_params()[-k:, -k:]
    return c @ theta, np.sqrt(np.diag(c @ v @ c.T))


@pytest.mark.parametrize(
    ("lag", "basis_for_statsmodels"),
    [
        # Almon (1965): powers of the lag (over 7, for conditioning), an equivalent parametrisation of our basis
        (PolynomialLag(0, 7, 3), lambda lag: polynomial.polyvander(lag.lags / 7.0, 3)),
        (SplineLag(0, 21, 4), lambda lag: lag.basis()),
        (SplineLag(0, 14, 4, knot_spacing="log"), lambda lag: lag.basis()),
        (UnconstrainedLag(0, 5), lambda lag: np.eye(6)),
    ],
    ids=["poly3-vandermonde", "spline4", "spline4-log", "unconstrained"],
)
@pytest.mark.filterwarnings("ignore:exposure .* leaves:airhealth.errors.DataWarning")  # long lags lose days by design
def test_constrained_lag_equals_ordinary_glm_on_projected_columns(frame_and_spec, lag, basis_for_statsmodels):
    # Source: statsmodels GLM (Seabold & Perktold 2010), Poisson family with Pearson-chi2 scale = quasi-Poisson.
    # Tolerance 1e-7 relative on the per-lag curve and its SEs: both programs converge to ~1e-10 on the
    # deviance; statsmodels' tolerance is on the coefficients. Per-lag values near zero are compared with an
    # absolute tolerance of 1e-6 of their SE.
    frame, spec = frame_and_spec
    result = fit(frame, "deaths_all", "pm25", lag=lag, temperature="temperature")
    curve, se = _statsmodels_curve(frame, spec, lag, basis_for_statsmodels(lag))
    ours = result.lag_coefficients()
    np.testing.assert_allclose(ours["coef"], curve, rtol=1e-7, atol=1e-6 * se.min())
    np.testing.assert_allclose(ours["se"], se, rtol=1e-7)
    # the per-lag curve is the lag basis times the fitted coefficients
    theta = result.coef[list(result.exposure_columns)].to_numpy()
    np.testing.assert_allclose(ours["coef"], lag.basis() @ theta, rtol=1e-12)
    assert result.exposure_coef == pytest.approx(curve.sum(), rel=1e-7)


def test_constrained_lag_fit_equals_fit_on_its_projected_columns_as_a_linear_confounder(sample):
    # The same model written by hand: Q C entered as ordinary linear covariates (airhealth's Linear terms).
    from airhealth.model.bases.terms import Linear

    lag = SplineLag(0, 10, 3)
    data = sample.copy()
    q = _lag_columns(data["pm25"], lag.lags) @ lag.basis()
    for j in range(q.shape[1]):
        data[f"z{j}"] = q[:, j]
    auto = fit(data, "deaths_all", "pm25", lag=lag, temperature="temperature")
    by_hand = fit(
        data,
        "deaths_all",
        "z0",
        lag="0",
        temperature="temperature",
        confounders=[Linear("z1"), Linear("z2")],
    )
    names = ["z0[0]", "z1", "z2"]
    np.testing.assert_allclose(auto.coef[list(auto.exposure_columns)], by_hand.coef[names], rtol=1e-8)


# ---------------------------------------------------------------- simulation with a known lag profile


def simulate_decaying_lag(seed: int, years: float = 4, mean_count: float = 60.0, rr_per_10: float = 1.05):
    """Daily Poisson counts with a PM effect spread over lags 0-13, weights ∝ exp(-lag/4) (invented data,
    Norhaven-style). Returns the frame and the true per-lag log-RR per unit."""
    rng = np.random.default_rng(seed)
    max_lag, n = 13, round(365.25 * years)
    t = np.arange(n + max_lag)
    noise = rng.standard_normal(t.size)
    ar = np.zeros(t.size)
    for i in range(1, t.size):
        ar[i] = 0.7 * ar[i - 1] + np.sqrt(1 - 0.49) * noise[i]
    pm = np.round(np.exp(np.log(18) + 0.25 * np.cos(2 * np.pi * t / 365.25) + 0.45 * ar), 1)
    weights = np.exp(-np.arange(max_lag + 1) / 4.0)
    beta = np.log(rr_per_10) / 10 * weights / weights.sum()
    lagged = np.column_stack([pm[max_lag - k : max_lag - k + n] for k in range(max_lag + 1)])
    day = t[max_lag:]
    log_mu = np.log(mean_count) + 0.12 * np.cos(2 * np.pi * (day - 20) / 365.25) - 0.02 * day / 365.25
    y = rng.poisson(np.exp(log_mu + lagged @ beta - (lagged @ beta).mean()))
    frame = pd.DataFrame({"date": pd.date_range("2015-01-01", periods=n), "deaths": y, "pm": pm[max_lag:]})
    frame.loc[rng.choice(n, 8, replace=False), "pm"] = np.nan
    return frame, beta


def _decaying_lag_run(seeds) -> tuple[np.ndarray, np.ndarray, float]:
    est, cover = [], []
    for seed in seeds:
        frame, beta = simulate_decaying_lag(seed)
        truth = 10 * beta.sum()
        result = fit(frame, "deaths", "pm", lag="dl0-13:spline4", trend_df_per_year=4, day_of_week=False)
        e = result.effect(per=10)
        est.append(np.log(e.rr))
        cover.append(np.log(e.rr_low) < truth < np.log(e.rr_high))
    return np.array(est), np.array(cover), truth


def test_simulated_decaying_lag_is_recovered_small_run():
    # 20 replicates (fixed seeds). Expected SE of one estimate ≈ 0.007 (log RR per 10), so the mean of 20
    # is within 0.005 of the truth (about 3 SE of the mean); at least 17/20 intervals should cover
    # (P(<= 16 | n=20, p=0.95) ≈ 0.016).
    est, cover, truth = _decaying_lag_run(range(20))
    assert abs(est.mean() - truth) < 0.005
    assert cover.sum() >= 17


@pytest.mark.slow
def test_simulated_decaying_lag_coverage_is_near_nominal():
    # 400 replicates: bias below 0.001 (SE of the mean ≈ 0.00035); coverage 0.95 ± 0.025 (binomial SD 0.011).
    est, cover, truth = _decaying_lag_run(range(1000, 1400))
    assert abs(est.mean() - truth) < 0.001
    assert 0.925 <= cover.mean() <= 0.975


def test_simulated_lag_profile_shape_is_recovered_on_average():
    # The fitted spline lag curve, averaged over replicates, follows exp(-lag/4): the lag-0 effect is the
    # largest and the curve falls by lag 13 to under a third of it. (A check of shape, not of numbers.)
    curves = []
    for seed in range(8):
        frame, beta = simulate_decaying_lag(seed, years=6)
        result = fit(frame, "deaths", "pm", lag="dl0-13:spline4", trend_df_per_year=4, day_of_week=False)
        curves.append(result.lag_coefficients()["coef"].to_numpy())
    mean = np.mean(curves, axis=0)
    assert np.argmax(mean) <= 1
    assert mean[-1] < mean[0] / 3
    np.testing.assert_allclose(mean, beta, atol=0.35 * beta[0])
