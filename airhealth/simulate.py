"""Simulate invented daily health, air-pollution and weather tables for a fictional city.

The simulator produces the three daily tables that airhealth works with (outcome counts, pollutant
concentrations, weather) with known, documented pollutant effects, so that models can be checked against
the truth. Nothing here describes a real place: the default city is the invented "Norhaven".

Data-generating process (per day *t*)
-------------------------------------
* Temperature: annual cosine cycle (mean 10.5 °C, amplitude 8.5 °C, warmest late July), a warming trend of
  0.03 °C per year, and AR(1) anomalies (lag-one autocorrelation 0.8, SD about 3 °C, larger in winter).
  Relative humidity: higher in winter and on cool days, AR(1) noise, clipped to 25–100 %.
* Pollutants: AR(1) processes on the log scale. A shared regional particle factor makes PM10, PM2.5 and
  NO2 positively correlated; PM2.5 is a time-varying fraction (45–75 %) of PM10; PM and NO2 are higher in
  winter, on cold days and on weekdays; ozone is higher in summer and on warm days and falls when NO2 is
  high (titration), so it is anti-correlated with NO2. PM and NO2 decline by 2.5–3.5 % a year.
* Counts: ``log mu_t = intercept + trend + seasonal + weekday + epidemic + heat + cold + pollution``, with
  ``Y_t ~ Poisson(mu_t G_t)`` and ``G_t ~ Gamma(shape=mu_t/(phi-1), scale=(phi-1)/mu_t)``, so that
  ``Var(Y_t) = phi mu_t`` exactly (the quasi-Poisson variance). Heat acts on the lag 0–1 mean
  temperature above 19 °C (linear plus quadratic, a J-shape); cold acts on temperatures below 19 °C over
  lags 0–13 with hump-shaped weights peaking at lag 3. Winter epidemics are Gaussian bumps with random
  timing and size each winter (strongest for respiratory admissions).
* Pollutant effects act on the true, complete (rounded) series; missing values are applied afterwards,
  so models fitted to the observed data are unbiased apart from the loss of days.

References
----------
.. [1] Bhaskaran K, Gasparrini A, Hajat S, Smeeth L, Armstrong B (2013). Time series regression studies in
   environmental epidemiology. International Journal of Epidemiology 42(4):1187–1195.
.. [2] Peng RD, Dominici F (2008). Statistical Methods for Environmental Epidemiology with R. Springer
   (chapter on simulating and checking time-series models).
.. [3] McCullagh P, Nelder JA (1989). Generalized Linear Models, 2nd ed. Chapman & Hall (quasi-likelihood,
   variance proportional to the mean).
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy.signal import lfilter

from .errors import SpecificationError

__all__ = [
    "BASELINE_COUNTS",
    "DISPERSION",
    "MINIMUM_MORTALITY_TEMPERATURE",
    "OUTCOMES",
    "POLLUTANTS",
    "TEMPERATURE_EFFECTS",
    "TRUE_EFFECTS",
    "simulate_city",
]

OUTCOMES = ("deaths_all", "admissions_respiratory", "admissions_cardiovascular")
POLLUTANTS = ("pm25", "pm10", "no2", "o3")

#: True pollutant effects: (outcome, pollutant) -> lag window (moving average of lags a..b) and relative
#: risk per 10 µg/m³. The log relative risk per 1 µg/m³ is ``log(rr_per_10) / 10``.
TRUE_EFFECTS: dict[tuple[str, str], dict[str, str | float]] = {
    ("deaths_all", "pm25"): {"lag": "0-1", "rr_per_10": 1.010},
    ("admissions_respiratory", "no2"): {"lag": "0", "rr_per_10": 1.015},
    ("admissions_respiratory", "o3"): {"lag": "0-1", "rr_per_10": 1.008},
    ("admissions_cardiovascular", "pm10"): {"lag": "0-1", "rr_per_10": 1.006},
}

#: Mean daily count of each outcome over the simulated period.
BASELINE_COUNTS: dict[str, float] = {
    "deaths_all": 35.0,
    "admissions_respiratory": 15.0,
    "admissions_cardiovascular": 25.0,
}

#: Dispersion phi (variance / mean of the count given the day's expected value).
DISPERSION: dict[str, float] = {
    "deaths_all": 1.4,
    "admissions_respiratory": 1.5,
    "admissions_cardiovascular": 1.3,
}

#: Temperature (°C) at which every outcome's temperature effect is smallest.
MINIMUM_MORTALITY_TEMPERATURE = 19.0

#: Temperature effects on the log scale. With ``h`` = lag 0–1 mean temperature minus 19 °C (if positive),
#: heat adds ``heat_linear*h + heat_quadratic*h**2``; cold adds ``cold_per_degree`` times the weighted
#: mean over lags 0–13 of ``max(19 - T, 0)``. Also: trend (change in log rate per year), the amplitude of
#: the residual winter peak, the relative size of winter epidemics, and the weekday pattern (log scale,
#: Monday..Sunday).
TEMPERATURE_EFFECTS: dict[str, dict[str, float | tuple[float, ...]]] = {
    "deaths_all": {
        "heat_linear": 0.020,
        "heat_quadratic": 0.002,
        "cold_per_degree": 0.012,
        "trend_per_year": -0.004,
        "winter_amplitude": 0.03,
        "epidemic_scale": 0.35,
        "weekday": (0.010, 0.0, 0.0, 0.0, 0.0, -0.005, -0.005),
    },
    "admissions_respiratory": {
        "heat_linear": 0.012,
        "heat_quadratic": 0.001,
        "cold_per_degree": 0.016,
        "trend_per_year": 0.006,
        "winter_amplitude": 0.08,
        "epidemic_scale": 1.0,
        "weekday": (0.08, 0.05, 0.03, 0.02, 0.0, -0.12, -0.15),
    },
    "admissions_cardiovascular": {
        "heat_linear": 0.008,
        "heat_quadratic": 0.001,
        "cold_per_degree": 0.012,
        "trend_per_year": 0.003,
        "winter_amplitude": 0.03,
        "epidemic_scale": 0.25,
        "weekday": (0.09, 0.05, 0.03, 0.02, 0.0, -0.14, -0.18),
    },
}

_COLD_LAGS = 14
_COLD_WEIGHTS = np.exp(-0.5 * ((np.arange(_COLD_LAGS) - 3.0) / 4.0) ** 2)
_COLD_WEIGHTS /= _COLD_WEIGHTS.sum()
_MAX_EFFECT_LAG = 30
_BURN_IN = 60
_LAG_PATTERN = re.compile(r"^\s*(\d+)\s*(?:-\s*(\d+)\s*)?$")


@dataclass(frozen=True)
class _Effect:
    outcome: str
    pollutant: str
    first_lag: int
    last_lag: int
    log_rr_per_unit: float


@dataclass(frozen=True)
class _Calendar:
    """Day-level calendar quantities, including the burn-in days before ``start``."""

    dates: pd.DatetimeIndex
    years: np.ndarray  # years since the first day after burn-in
    winter: np.ndarray  # cos cycle: +1 mid-January, -1 mid-July
    weekday: np.ndarray  # 0 = Monday


def _parse_lag(spec: object, key: tuple[str, str]) -> tuple[int, int]:
    match = _LAG_PATTERN.match(str(spec))
    if match is None:
        raise SpecificationError(
            f"effects[{key!r}]['lag']={spec!r} is not a lag; use a single lag such as '0' or a window such as '0-1'."
        )
    first = int(match.group(1))
    last = int(match.group(2)) if match.group(2) is not None else first
    if first > last or last > _MAX_EFFECT_LAG:
        raise SpecificationError(
            f"effects[{key!r}]['lag']={spec!r} must satisfy 0 <= first <= last <= {_MAX_EFFECT_LAG}."
        )
    return first, last


def _check_effects(effects: Mapping[tuple[str, str], Mapping[str, object]]) -> list[_Effect]:
    checked = []
    for key, spec in effects.items():
        if not (isinstance(key, tuple) and len(key) == 2 and key[0] in OUTCOMES and key[1] in POLLUTANTS):
            raise SpecificationError(
                f"effects key {key!r} must be an (outcome, pollutant) pair with outcome in {OUTCOMES} "
                f"and pollutant in {POLLUTANTS}."
            )
        if "lag" not in spec or "rr_per_10" not in spec:
            raise SpecificationError(f"effects[{key!r}] needs both 'lag' and 'rr_per_10' entries.")
        rr = float(spec["rr_per_10"])
        if not np.isfinite(rr) or rr <= 0:
            raise SpecificationError(f"effects[{key!r}]['rr_per_10']={rr!r} must be a positive number.")
        first, last = _parse_lag(spec["lag"], key)
        checked.append(_Effect(key[0], key[1], first, last, float(np.log(rr) / 10.0)))
    return checked


def _check_outcome_mapping(
    name: str, given: Mapping[str, float] | None, default: dict[str, float], low: float, strict: bool
) -> dict[str, float]:
    values = dict(default)
    if given is not None:
        unknown = set(given) - set(OUTCOMES)
        if unknown:
            raise SpecificationError(f"{name} has unknown outcomes {sorted(unknown)}; use {OUTCOMES}.")
        values.update({k: float(v) for k, v in given.items()})
    for key, value in values.items():
        if not np.isfinite(value) or value < low or (strict and value == low):
            relation = ">" if strict else ">="
            raise SpecificationError(f"{name}[{key!r}]={value!r} must be a finite number {relation} {low}.")
    return values


def _calendar(start: pd.Timestamp, end: pd.Timestamp) -> _Calendar:
    dates = pd.date_range(start - pd.Timedelta(days=_BURN_IN), end, freq="D")
    day_of_year = dates.day_of_year.to_numpy(dtype=float)
    years = (np.arange(len(dates)) - _BURN_IN) / 365.25
    winter = np.cos(2.0 * np.pi * (day_of_year - 15.0) / 365.25)
    return _Calendar(dates, years, winter, dates.day_of_week.to_numpy())


def _ar1(rng: np.random.Generator, n: int, phis: np.ndarray) -> np.ndarray:
    """Return ``n`` x ``len(phis)`` stationary AR(1) series with unit marginal variance."""
    phis = np.asarray(phis, dtype=float)
    innovations = rng.standard_normal((n, phis.size)) * np.sqrt(1.0 - phis**2)
    start = rng.standard_normal(phis.size)
    out = np.empty((n, phis.size))
    for j, phi in enumerate(phis):
        out[:, j], _ = lfilter([1.0], [1.0, -phi], innovations[:, j], zi=[phi * start[j]])
    return out


def _simulate_weather(rng: np.random.Generator, cal: _Calendar, offset: float) -> tuple[np.ndarray, ...]:
    noise = _ar1(rng, len(cal.dates), np.array([0.8, 0.6]))
    anomaly = (3.2 + 0.4 * cal.winter) * noise[:, 0]
    temperature = np.round(10.5 + offset - 9.0 * cal.winter + 0.03 * cal.years + anomaly, 1)
    humidity = 77.0 + 7.0 * cal.winter - 1.2 * anomaly + 7.0 * noise[:, 1]
    return temperature, np.round(np.clip(humidity, 25.0, 100.0), 1), anomaly


def _simulate_pollution(
    rng: np.random.Generator, cal: _Calendar, anomaly: np.ndarray, scale: float
) -> dict[str, np.ndarray]:
    """Return complete pollutant series (µg/m³, rounded to 0.1) including the burn-in days."""
    regional, own_pm, fraction_noise, own_no2, own_o3 = _ar1(
        rng, len(cal.dates), np.array([0.75, 0.5, 0.6, 0.6, 0.7])
    ).T
    traffic = np.array([0.04, 0.05, 0.05, 0.05, 0.04, -0.10, -0.18])[cal.weekday]
    log_pm10 = (
        np.log(24.0 * scale)
        - 0.030 * cal.years
        + 0.20 * cal.winter
        - 0.015 * anomaly
        + 0.38 * regional
        + 0.20 * own_pm
        + 0.5 * traffic
    )
    fraction = 0.35 + 0.45 / (1.0 + np.exp(-(0.3 + 0.4 * regional + 1.2 * fraction_noise + 0.4 * cal.winter)))
    no2_anomaly = 0.22 * regional + 0.25 * own_no2 + traffic - 0.01 * anomaly
    log_no2 = np.log(28.0 * scale) - 0.035 * cal.years + 0.18 * cal.winter + no2_anomaly
    log_o3 = np.log(52.0) + 0.004 * cal.years - 0.30 * cal.winter + 0.025 * anomaly - 0.6 * no2_anomaly + 0.15 * own_o3
    pm10 = np.exp(log_pm10)
    return {
        "pm25": np.round(np.maximum(fraction * pm10, 0.5), 1),
        "pm10": np.round(np.maximum(pm10, 1.0), 1),
        "no2": np.round(np.maximum(np.exp(log_no2), 0.5), 1),
        "o3": np.round(np.maximum(np.exp(log_o3), 1.0), 1),
    }


def _lag_mean(x: np.ndarray, first: int, last: int) -> np.ndarray:
    """Mean of ``x[t-first] .. x[t-last]``; the first ``last`` entries are NaN (they fall in the burn-in)."""
    cumulative = np.concatenate([[0.0], np.cumsum(x)])
    out = np.full(x.shape, np.nan)
    t = np.arange(last, len(x))
    out[t] = (cumulative[t - first + 1] - cumulative[t - last]) / (last - first + 1)
    return out


def _epidemics(rng: np.random.Generator, cal: _Calendar) -> np.ndarray:
    """Log-scale winter epidemic curve (scale of respiratory admissions), one bump per winter."""
    day = np.arange(len(cal.dates), dtype=float)
    curve = np.zeros(len(cal.dates))
    first, last = cal.dates[0].year - 1, cal.dates[-1].year + 1
    for year in range(first, last + 1):
        centre = (pd.Timestamp(year=year, month=1, day=15) - cal.dates[0]).days + rng.uniform(-35, 35)
        width = rng.uniform(8.0, 18.0)
        curve += rng.uniform(0.10, 0.40) * np.exp(-0.5 * ((day - centre) / width) ** 2)
    return curve


def _temperature_log_rr(temperature: np.ndarray, params: Mapping[str, object]) -> np.ndarray:
    heat = np.maximum(_lag_mean(temperature, 0, 1) - MINIMUM_MORTALITY_TEMPERATURE, 0.0)
    cold_degrees = np.maximum(MINIMUM_MORTALITY_TEMPERATURE - temperature, 0.0)
    cold = np.full(temperature.shape, np.nan)
    cold[_COLD_LAGS - 1 :] = np.convolve(cold_degrees, _COLD_WEIGHTS, mode="valid")
    return params["heat_linear"] * heat + params["heat_quadratic"] * heat**2 + params["cold_per_degree"] * cold


def _simulate_counts(
    rng: np.random.Generator,
    cal: _Calendar,
    temperature: np.ndarray,
    pollution: Mapping[str, np.ndarray],
    effects: list[_Effect],
    baseline: Mapping[str, float],
    dispersion: Mapping[str, float],
) -> dict[str, np.ndarray]:
    """Return gamma–Poisson counts for the days after the burn-in."""
    epidemic = _epidemics(rng, cal)
    keep = slice(_BURN_IN, None)
    counts = {}
    for outcome in OUTCOMES:
        params = TEMPERATURE_EFFECTS[outcome]
        log_mu = (
            params["trend_per_year"] * cal.years
            + params["winter_amplitude"] * cal.winter
            + np.asarray(params["weekday"])[cal.weekday]
            + params["epidemic_scale"] * epidemic
            + _temperature_log_rr(temperature, params)
        )
        for effect in effects:
            if effect.outcome == outcome:
                exposure = _lag_mean(pollution[effect.pollutant], effect.first_lag, effect.last_lag)
                log_mu = log_mu + effect.log_rr_per_unit * exposure
        mu = np.exp(log_mu[keep])
        mu *= baseline[outcome] / mu.mean()
        phi = dispersion[outcome]
        if phi > 1.0:
            shape = mu / (phi - 1.0)
            mu = mu * rng.gamma(shape, 1.0 / shape)
        counts[outcome] = rng.poisson(mu).astype(np.int64)
    return counts


def _remove_values(
    rng: np.random.Generator, pollution: pd.DataFrame, fraction: float, outage_days: int
) -> pd.DataFrame:
    """Blank ``fraction`` of each pollutant's values and drop ``outage_days`` consecutive rows."""
    n = len(pollution)
    observed = pollution.copy()
    if outage_days:
        margin = min(30, (n - outage_days) // 2)
        first = int(rng.integers(margin, n - outage_days - margin + 1))
        observed = observed.drop(index=observed.index[first : first + outage_days])
    for column in POLLUTANTS:
        rows = rng.choice(len(observed), size=round(fraction * len(observed)), replace=False)
        observed.iloc[np.sort(rows), observed.columns.get_loc(column)] = np.nan
    return observed.reset_index(drop=True)


def simulate_city(
    seed: int | np.random.Generator = 20261202,
    start: str | pd.Timestamp = "2010-01-01",
    end: str | pd.Timestamp = "2023-12-31",
    *,
    name: str = "Norhaven",
    effects: Mapping[tuple[str, str], Mapping[str, object]] | None = None,
    baseline: Mapping[str, float] | None = None,
    dispersion: Mapping[str, float] | None = None,
    pollution_scale: float = 1.0,
    temperature_offset: float = 0.0,
    missing_fraction: float = 0.015,
    outage_days: int = 9,
    include_truth: bool = False,
) -> dict[str, pd.DataFrame]:
    """Simulate the daily counts, pollution and weather tables of one invented city.

    Parameters
    ----------
    seed : int or numpy.random.Generator
        Seed (or generator) for ``numpy.random.default_rng``; the same seed gives identical tables.
    start, end : str or pandas.Timestamp
        First and last day (inclusive). At least 60 days are needed.
    name : str
        City name, stored in each table's ``attrs["city"]``.
    effects : mapping, optional
        ``{(outcome, pollutant): {"lag": "0-1", "rr_per_10": 1.01}}``; defaults to :data:`TRUE_EFFECTS`.
        Pass ``{}`` for no pollutant effect. Lags are moving averages of lags ``a..b`` (at most 30).
    baseline : mapping, optional
        Mean daily count per outcome (overrides :data:`BASELINE_COUNTS` for the outcomes given).
    dispersion : mapping, optional
        Dispersion ``phi >= 1`` per outcome (overrides :data:`DISPERSION`); 1 gives Poisson counts.
    pollution_scale : float
        Multiplies the PM and NO2 levels (ozone is unchanged), to vary cities.
    temperature_offset : float
        Added to the mean temperature (°C), to vary climates.
    missing_fraction : float
        Fraction of each pollutant's remaining rows set to NaN, chosen independently per pollutant.
    outage_days : int
        Length of one monitor outage; these consecutive dates are absent from the pollution table.
    include_truth : bool
        Also return ``"pollution_true"``: the complete series on which the effects act.

    Returns
    -------
    dict of str to pandas.DataFrame
        ``"counts"`` (date, deaths_all, admissions_respiratory, admissions_cardiovascular),
        ``"pollution"`` (date, pm25, pm10, no2, o3 in µg/m³), ``"weather"`` (date, temperature in °C,
        humidity in %), each with a ``datetime64`` ``date`` column; plus ``"pollution_true"`` if asked.

    Raises
    ------
    SpecificationError
        For an invalid period, effect, baseline, dispersion, missing fraction or outage length.

    References
    ----------
    .. [1] Bhaskaran K et al. (2013). Time series regression studies in environmental epidemiology.
       International Journal of Epidemiology 42(4):1187–1195.
    .. [2] McCullagh P, Nelder JA (1989). Generalized Linear Models, 2nd ed. Chapman & Hall.

    Examples
    --------
    >>> tables = simulate_city(1, "2015-01-01", "2015-12-31")
    >>> sorted(tables)
    ['counts', 'pollution', 'weather']
    >>> len(tables["counts"]), len(tables["pollution"])
    (365, 356)
    """
    start_day, end_day = pd.Timestamp(start).normalize(), pd.Timestamp(end).normalize()
    n_days = (end_day - start_day).days + 1
    if n_days < 60:
        raise SpecificationError(f"start={start!r} to end={end!r} covers {n_days} days; give at least 60.")
    if not 0.0 <= missing_fraction < 0.5:
        raise SpecificationError(f"missing_fraction={missing_fraction!r} must be in [0, 0.5).")
    if not 0 <= int(outage_days) <= n_days // 4:
        raise SpecificationError(f"outage_days={outage_days!r} must be between 0 and {n_days // 4}.")
    if not (np.isfinite(pollution_scale) and pollution_scale > 0):
        raise SpecificationError(f"pollution_scale={pollution_scale!r} must be a positive number.")
    checked = _check_effects(TRUE_EFFECTS if effects is None else effects)
    base = _check_outcome_mapping("baseline", baseline, BASELINE_COUNTS, 0.0, strict=True)
    phis = _check_outcome_mapping("dispersion", dispersion, DISPERSION, 1.0, strict=False)
    rng = np.random.default_rng(seed)
    cal = _calendar(start_day, end_day)
    temperature, humidity, anomaly = _simulate_weather(rng, cal, float(temperature_offset))
    pollution = _simulate_pollution(rng, cal, anomaly, float(pollution_scale))
    counts = _simulate_counts(rng, cal, temperature, pollution, checked, base, phis)
    dates = cal.dates[_BURN_IN:].astype("datetime64[ns]")
    tables = {
        "counts": pd.DataFrame({"date": dates, **counts}),
        "weather": pd.DataFrame(
            {"date": dates, "temperature": temperature[_BURN_IN:], "humidity": humidity[_BURN_IN:]}
        ),
    }
    truth = pd.DataFrame({"date": dates, **{k: v[_BURN_IN:] for k, v in pollution.items()}})
    tables["pollution"] = _remove_values(rng, truth, missing_fraction, int(outage_days))
    if include_truth:
        tables["pollution_true"] = truth
    tables = {key: tables[key] for key in ("counts", "pollution", "weather", "pollution_true") if key in tables}
    for table in tables.values():
        table.attrs["city"] = name
    return tables
