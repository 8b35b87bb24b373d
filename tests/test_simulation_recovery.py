"""Recovery of a known log relative risk from simulated cities, and coverage of the 95% intervals.

Data come from :func:`airhealth.simulate.simulate_city` (invented "Norhaven"-like cities) with one chosen
pollutant effect; everything else in the simulator (season, trend, weekday, heat and cold, winter
epidemics, over-dispersion, missing days, a monitor outage) is left on, so the standard model is
checked under realistic confounding. For each draw the 95% Wald interval, on the log
scale β̂ ± 1.959964·SE, either covers the true β or not.

Tolerances (common practice for simulation studies, no source): with R draws and nominal coverage
0.95, the number of covering intervals is Binomial(R, 0.95) if the intervals are right; the test accepts
counts within the central 99.8% of that distribution. The mean estimate must lie within 3.5 Monte-Carlo
standard errors (SD of the estimates / √R) of the truth, and the SD of the standardised errors
(β̂ − β)/SE must be near 1 (model SEs neither too small nor too large) within a chi-square-based band.
Seeds are fixed, so the outcome is deterministic; the bands only decide which results are acceptable.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy import stats

import airhealth
from airhealth.simulate import simulate_city

Z95 = 1.959964


def simulate_estimates(
    n_draws: int,
    years: int,
    rr_per_10: float,
    outcome: str = "deaths_all",
    pollutant: str = "pm25",
    lag: str = "0-1",
    first_seed: int = 7000,
) -> np.ndarray:
    """Fit the standard model to ``n_draws`` simulated cities; return rows (estimate, SE, dispersion)."""
    effects = {(outcome, pollutant): {"lag": lag, "rr_per_10": rr_per_10}}
    out = np.empty((n_draws, 3))
    for i in range(n_draws):
        tables = simulate_city(first_seed + i, "2012-01-01", f"{2012 + years - 1}-12-31", effects=effects)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", airhealth.DataWarning)  # the outage gap, filled by design
            data = airhealth.align_daily(tables["counts"], tables["pollution"], tables["weather"])
            result = airhealth.fit(data, outcome=outcome, exposure=pollutant, lag=lag, temperature="temperature")
        out[i] = result.exposure_coef, result.exposure_se, result.dispersion
    return out


def check_recovery(estimates: np.ndarray, beta: float) -> None:
    n = len(estimates)
    coef, se = estimates[:, 0], estimates[:, 1]
    covered = int(np.sum(np.abs(coef - beta) <= Z95 * se))
    low, high = stats.binom.ppf([0.001, 0.999], n, 0.95)
    assert low <= covered <= high, f"{covered}/{n} intervals cover the truth; expected {low:.0f}–{high:.0f}"
    mc_se = coef.std(ddof=1) / np.sqrt(n)
    assert abs(coef.mean() - beta) < 3.5 * mc_se, (coef.mean(), beta, mc_se)
    z = (coef - beta) / se
    # SD of n standard normal values: (n-1) s² ~ χ²(n-1); central 99.8% band
    s_low, s_high = np.sqrt(stats.chi2.ppf([0.001, 0.999], n - 1) / (n - 1))
    assert s_low <= z.std(ddof=1) <= s_high, z.std(ddof=1)


def test_known_log_rr_is_recovered_and_intervals_cover():
    rr = 1.02
    estimates = simulate_estimates(n_draws=40, years=4, rr_per_10=rr)
    check_recovery(estimates, np.log(rr) / 10)
    # the estimate is informative: it separates a 2% effect per 10 µg/m³ from no effect on average
    assert estimates[:, 0].mean() / estimates[:, 1].mean() > 1.5
    # the dispersion of the counts is recovered (simulated φ = 1.4 for deaths; Pearson χ² / df)
    assert estimates[:, 2].mean() == pytest.approx(1.4, abs=0.05)


def test_no_effect_gives_no_effect():
    estimates = simulate_estimates(
        n_draws=20, years=4, rr_per_10=1.0, outcome="admissions_respiratory", pollutant="no2", lag="0", first_seed=9100
    )
    check_recovery(estimates, 0.0)


@pytest.mark.slow
@pytest.mark.parametrize(
    ("outcome", "pollutant", "lag", "rr"),
    [
        ("deaths_all", "pm25", "0-1", 1.02),
        ("admissions_respiratory", "no2", "0", 1.0),
        ("admissions_cardiovascular", "pm10", "2", 1.015),
    ],
)
def test_coverage_over_many_draws(outcome, pollutant, lag, rr):
    estimates = simulate_estimates(
        n_draws=200, years=4, rr_per_10=rr, outcome=outcome, pollutant=pollutant, lag=lag, first_seed=20000
    )
    check_recovery(estimates, np.log(rr) / 10)
