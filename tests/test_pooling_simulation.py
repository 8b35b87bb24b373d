"""Pooling recovers a known mean effect and between-city variance from simulated city estimates.

The truth is set by the simulation (fixed seeds), so these checks need no outside program: REML and
DerSimonian–Laird are consistent for tau², the pooled mean is unbiased, and the multivariate estimators are
consistent for the between-city covariance (Jackson, White & Riley 2013; Viechtbauer 2005).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import airhealth

TRUE_MEAN = 0.0008  # log RR per unit, about 0.8% per 10 µg/m³
TRUE_TAU2 = 2e-7
K = 200


def simulated_cities(rng: np.random.Generator, k: int = K) -> pd.DataFrame:
    se = np.sqrt(rng.uniform(0.5e-7, 4e-7, k))
    coef = TRUE_MEAN + rng.normal(0, np.sqrt(TRUE_TAU2), k) + rng.normal(0, se)
    return pd.DataFrame({"city": [f"c{i:03d}" for i in range(k)], "coef": coef, "se": se})


@pytest.mark.parametrize("method", ["reml", "dl"])
def test_one_study_of_200_cities_lands_near_the_truth(method):
    result = airhealth.pool(simulated_cities(np.random.default_rng(101)), method=method)
    # within 3 standard errors (of the mean: its SE; of tau²: the REML SE, also a fair scale for DL)
    tau2_se = airhealth.pool(simulated_cities(np.random.default_rng(101)), method="reml").heterogeneity.tau2_se
    assert abs(result.coef - TRUE_MEAN) < 3 * result.se
    assert abs(result.tau2 - TRUE_TAU2) < 3 * tau2_se
    assert 0.1 * TRUE_TAU2 < tau2_se < 0.3 * TRUE_TAU2  # so the check above pins tau² to within ±60%


def test_estimates_average_to_the_truth_over_repeated_studies():
    rng = np.random.default_rng(202)
    runs = [simulated_cities(rng) for _ in range(100)]
    for method in ("reml", "dl"):
        results = [airhealth.pool(r, method=method) for r in runs]
        tau2 = np.array([r.tau2 for r in results])
        mean = np.array([r.coef for r in results])
        # Monte Carlo error of an average of 100 runs: SD / 10; 4 of them keeps a false alarm below 1e-4.
        assert abs(tau2.mean() - TRUE_TAU2) < 4 * tau2.std() / 10, method
        assert abs(mean.mean() - TRUE_MEAN) < 4 * mean.std() / 10, method
        covered = np.mean([lo <= TRUE_MEAN <= hi for lo, hi in (r.ci for r in results)])
        assert covered >= 0.88, method  # nominal 0.95; binomial SD over 100 runs is 0.022


def test_fixed_effect_ignores_heterogeneity_and_its_interval_is_too_narrow():
    cities = simulated_cities(np.random.default_rng(303))
    fixed, reml = airhealth.pool(cities, method="fixed"), airhealth.pool(cities, method="reml")
    assert fixed.tau2 == 0
    assert fixed.se < 0.7 * reml.se
    assert fixed.prediction_interval == pytest.approx(fixed.ci)


TRUE_BETWEEN = np.array([[4.0, 2.0], [2.0, 3.0]]) * 1e-7
TRUE_VECTOR = np.array([0.0006, 0.0003])


def simulated_vectors(rng: np.random.Generator, k: int = K) -> tuple[np.ndarray, np.ndarray]:
    covs = np.empty((k, 2, 2))
    coefs = np.empty((k, 2))
    for i in range(k):
        a = rng.normal(size=(2, 2))
        covs[i] = (a @ a.T + np.eye(2)) * rng.uniform(0.5e-7, 1.5e-7)
        coefs[i] = rng.multivariate_normal(TRUE_VECTOR, TRUE_BETWEEN + covs[i])
    return coefs, covs


@pytest.mark.parametrize("method", ["reml", "mm"])
def test_multivariate_pooling_recovers_the_between_city_covariance(method):
    rng = np.random.default_rng(404)
    results = [airhealth.pool_multivariate(*simulated_vectors(rng), method=method) for _ in range(20)]
    between = np.array([r.between_cov for r in results])
    coef = np.array([r.coef for r in results])
    # Monte Carlo error of an average of 20 runs: SD / sqrt(20); 4 of them keeps a false alarm rare.
    assert np.all(np.abs(between.mean(axis=0) - TRUE_BETWEEN) < 4 * between.std(axis=0) / np.sqrt(20))
    assert np.all(np.abs(coef.mean(axis=0) - TRUE_VECTOR) < 4 * coef.std(axis=0) / np.sqrt(20))
    # and the reported SEs describe the spread of the pooled vectors across studies (to within 35%)
    np.testing.assert_allclose(np.mean([r.se for r in results], axis=0), coef.std(axis=0, ddof=1), rtol=0.35)
