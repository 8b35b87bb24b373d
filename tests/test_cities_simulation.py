"""The two-stage analysis recovers the known mean effect and between-city variance of simulated cities.

The truth is set by the invented scenario (airhealth/cities/simulate_cities.py, fixed seeds): the pooled mean
must lie within 2 of its standard errors of the true mean, and the REML tau² within 2 of its standard errors
(Viechtbauer 2005's REML information) of the true between-city variance. Two standard errors: a fixed-seed
check that fails about 1 time in 20 under a correct analysis if the seed were drawn at random; the seeds are
fixed, so it either holds or shows a bias.
"""

from __future__ import annotations

import pytest

import airhealth
from airhealth.cities.simulate_cities import simulate_cities

MODEL = {"outcome": "deaths", "exposure": "pm25", "lag": "0-1", "temperature": "temperature"}


def recovered(n_cities: int, years: float, seed: int, executor="serial"):
    scenario = simulate_cities(n_cities=n_cities, years=years, seed=seed, broken=True)
    with pytest.warns(airhealth.DataWarning, match="could not be fitted"):
        table = airhealth.fit_cities(scenario.frames, executor, show_progress=False, **MODEL)
    with pytest.warns(airhealth.DataWarning, match=f"left out of the pooling: {scenario.broken_city}"):
        pooled = airhealth.pool(table, method="reml", per=1)
    return scenario, table, pooled


def test_twenty_cities_recover_the_mean_and_between_city_variance():
    scenario, table, pooled = recovered(20, 5, seed=2026)
    assert "kelvins" in table.set_index("city").loc[scenario.broken_city, "error"]
    assert pooled.k == 19
    assert abs(pooled.coef - scenario.mean_coef) < 2 * pooled.se
    h = pooled.heterogeneity
    assert abs(h.tau2 - scenario.between_sd**2) < 2 * h.tau2_se
    assert h.tau2 > 0 and h.q_p < 0.05  # the between-city variation is detected, not only bounded


@pytest.mark.slow
def test_two_hundred_cities_of_fourteen_years_pin_the_truth():
    scenario, _, pooled = recovered(200, 14, seed=7, executor=None)
    h = pooled.heterogeneity
    # this seed's 200 true effects happen to vary less than the population (variance 1.22e-7 against 1.6e-7,
    # 2.4 of its sampling SDs): the analysis is checked against what the cities' true effects were
    realized = scenario.truth.set_index("city").drop(index=scenario.broken_city).true_coef
    assert abs(pooled.coef - realized.mean()) < 2 * pooled.se
    assert abs(h.tau2 - realized.var()) < 2 * h.tau2_se
    assert h.tau2_se < 0.2 * scenario.between_sd**2  # precise enough for the check above to mean something
