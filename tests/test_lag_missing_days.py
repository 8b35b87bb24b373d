"""Every lag structure applies one missing-day rule, by one piece of code: a day's lag term is missing when
any day of its window is missing or before the series, except for a moving average with ``min_count``, whose
mean uses the days present when there are at least ``min_count``; an exposure-lag basis follows the rule of
its lag structure."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.model.bases.distributed_lags import PolynomialLag, SplineLag, UnconstrainedLag
from airhealth.model.bases.exposure_lag import ExposureLagBasis, LinearResponse, SplineResponse, ThresholdResponse
from airhealth.model.bases.lag_structures import MovingAverage, SingleDay

NAN = np.nan
X = np.array([1.0, NAN, 3.0, 5.0, NAN, NAN, 7.0, 9.0])


def test_exposure_lag_basis_over_a_moving_average_honours_min_count_by_hand():
    # f(x) = max(x - 2, 0) on X: [0, -, 1, 3, -, -, 5, 7]. Mean over lags 0-2 of the days present, when at
    # least 2 are present (worked by hand): day 2 (1 + 0)/2, day 3 (3 + 1)/2, day 4 (3 + 1)/2, day 7 (7 + 5)/2.
    basis = ExposureLagBasis(ThresholdResponse(2.0), MovingAverage(0, 2, min_count=2))
    np.testing.assert_array_equal(basis.columns(X)[:, 0], [NAN, NAN, 0.5, 2.0, 2.0, NAN, NAN, 6.0])
    # at least 1 present: also day 0 (0), day 1 (0), day 5 (3), day 6 (5)
    basis = ExposureLagBasis(ThresholdResponse(2.0), "0-2 min 1")
    np.testing.assert_array_equal(basis.columns(X)[:, 0], [0.0, 0.0, 0.5, 2.0, 2.0, 3.0, 5.0, 6.0])
    # the usual rule (every day of the window): no day of X has three days in a row
    assert np.isnan(ExposureLagBasis(ThresholdResponse(2.0), "0-2").columns(X)).all()


@pytest.mark.parametrize(("first", "last", "min_count"), [(0, 2, 1), (0, 2, 2), (1, 3, 2), (0, 6, 3)])
def test_a_spline_exposure_lag_basis_averages_each_column_as_pandas_rolling_does(first, last, min_count):
    # Reference: pandas rolling(window, min_periods).mean() -- the mean of the non-missing values of each
    # window when there are at least min_periods of them -- of each spline column, shifted by the first lag.
    rng = np.random.default_rng(8)
    x = rng.gamma(4.0, 5.0, 120)
    x[rng.choice(120, 30, replace=False)] = NAN
    basis = ExposureLagBasis(SplineResponse(df=3), MovingAverage(first, last, min_count)).bind(x)
    f = basis.response.spline.evaluate(x)
    width = last - first + 1
    expected = np.column_stack(
        [pd.Series(f[:, j]).shift(first).rolling(width, min_periods=min_count).mean() for j in range(3)]
    )
    np.testing.assert_allclose(basis.columns(x), expected, rtol=1e-12, atol=1e-15, equal_nan=True)


@pytest.mark.parametrize(
    "lag",
    [
        SingleDay(0),
        SingleDay(2),
        MovingAverage(0, 3),
        MovingAverage(1, 2),
        UnconstrainedLag(0, 3),
        PolynomialLag(1, 4, 2),
        SplineLag(0, 5, 3),
        SplineLag(0, 5, 3, knot_spacing="log"),
        ExposureLagBasis(LinearResponse(), "dl0-3"),
        ExposureLagBasis(SplineResponse(df=2), "0-3"),
        ExposureLagBasis(ThresholdResponse(20.0), SplineLag(0, 5, 3)),
    ],
    ids=lambda lag: lag.label,
)
def test_without_min_count_a_day_is_missing_when_any_day_of_its_window_is(lag):
    rng = np.random.default_rng(2)
    x = rng.gamma(4.0, 5.0, 80)
    x[[10, 30, 31, 55]] = NAN
    window_complete = pd.DataFrame({k: pd.Series(x).shift(k) for k in lag.lags.tolist()}).notna().all(axis=1).to_numpy()
    columns = lag.columns(x)
    assert (np.isfinite(columns).all(axis=1) == window_complete).all()
    assert np.isnan(columns[~window_complete]).all()


def test_a_fit_over_an_exposure_lag_basis_keeps_the_days_its_moving_average_keeps(sample):
    data = sample[sample["date"] < "2012-01-01"].reset_index(drop=True)
    options = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}
    plain = airhealth.fit(data, lag="0-1 min 1", **options)
    as_basis = airhealth.fit(data, lag=ExposureLagBasis(LinearResponse(), "0-1 min 1"), **options)
    strict = airhealth.fit(data, lag=ExposureLagBasis(LinearResponse(), "0-1"), **options)
    assert as_basis.n_days == plain.n_days > strict.n_days
    # the same model written two ways: equal to the engine's convergence tolerance (relative deviance 1e-10)
    assert as_basis.effect().coef == pytest.approx(plain.effect().coef, rel=1e-8)
    assert "exposure missing in lag window" not in set(as_basis.dropped["reason"])
