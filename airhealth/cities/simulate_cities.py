r"""An invented multi-city scenario with known city effects, for checks, examples and benchmarks.

Every city and every number here is invented. City :math:`i` gets a true log relative risk per µg/m³ of
PM2.5 (lag 0–1 mean) :math:`\beta_i \sim N(\mu, \tau^2)` around a known mean :math:`\mu` with a known
between-city SD :math:`\tau`; its daily deaths follow

.. math:: \log m_t = \log b_i + s_t + h(T_t) + w_t + \beta_i\,\bar x_{t,0\text{-}1},\qquad
          Y_t \sim \text{Poisson}(m_t G_t),\quad G_t \sim \Gamma(\text{mean } 1, \text{var } (\phi-1)/m_t),

so :math:`\operatorname{Var}(Y_t) = \phi\,m_t` (the quasi-Poisson variance), with a winter peak :math:`s_t`,
a U-shaped temperature term :math:`h` (minimum at 18 °C), a weekday pattern :math:`w_t`, temperature as an
annual cycle plus AR(1) anomalies, and PM2.5 log-normal with an annual cycle and AR(1) day-to-day
variation. Cities differ in size (mean deaths), climate, pollution level, length of record (when
``vary_length``) and share of missing PM2.5 days. With ``broken=True`` the last city's temperature is
recorded in kelvins — data the model refuses, so a multi-city run must report it and carry on.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import signal

from ..errors import SpecificationError

__all__ = ["CITY_NAMES", "CitiesScenario", "simulate_cities"]

#: Invented city names (more cities are numbered: "Town 0021", ...).
CITY_NAMES = (
    "Alderwick", "Brackenmoor", "Caddon Ferry", "Dunmere", "Elsworth Vale", "Fallowby", "Greyhollow",
    "Harrowgate Sands", "Ivelmouth", "Juniper Cross", "Kestrel Bay", "Lanbury", "Marrowfield", "Nettlecombe",
    "Oxley Down", "Pellingford", "Quarry Holme", "Rushby", "Saltmarsh End", "Thistleton",
)  # fmt: skip

_START = pd.Timestamp("2008-01-01")


@dataclass(frozen=True)
class CitiesScenario:
    """Simulated cities: ``frames`` (name → daily frame), ``truth`` (city, true_coef) and the known parameters."""

    frames: dict[str, pd.DataFrame]
    truth: pd.DataFrame
    mean_coef: float
    between_sd: float
    broken_city: str | None

    def long(self) -> pd.DataFrame:
        """All cities in one long frame with a ``city`` column."""
        return pd.concat([f.assign(city=name) for name, f in self.frames.items()], ignore_index=True)


def _names(n: int) -> list[str]:
    return [CITY_NAMES[i] if i < len(CITY_NAMES) else f"Town {i + 1:04d}" for i in range(n)]


def _ar1(rng: np.random.Generator, n: int, phi: float, sd: float) -> np.ndarray:
    """Stationary AR(1) series with lag-one correlation ``phi`` and marginal SD ``sd``."""
    e = rng.normal(0.0, sd * np.sqrt(1 - phi**2), n)
    e[0] = rng.normal(0.0, sd)  # the stationary start
    return signal.lfilter([1.0], [1.0, -phi], e)  # out[t] = phi * out[t-1] + e[t]


@functools.lru_cache(maxsize=8)
def _calendar(n_days: int) -> tuple[pd.DatetimeIndex, np.ndarray]:
    """The days from 2008-01-01 and their ISO text (shared by cities of the same length)."""
    dates = pd.date_range(_START, periods=n_days, freq="D")
    return dates, np.asarray(dates.strftime("%Y-%m-%d"), dtype=object)


def _city(rng: np.random.Generator, n_days: int, coef: float, missing: float) -> pd.DataFrame:
    dates, text = _calendar(n_days)
    doy = dates.day_of_year.to_numpy()
    season = np.cos(2 * np.pi * (doy - 15) / 365.25)  # 1 in mid-January
    temperature = 11 + rng.uniform(-4, 4) - 8 * season + _ar1(rng, n_days, 0.75, 3.0)
    pm = np.exp(np.log(rng.uniform(8, 25)) + 0.25 * season + _ar1(rng, n_days, 0.6, 0.45))
    pm01 = (pm + np.concatenate([[pm[0]], pm[:-1]])) / 2
    weekday = np.array([0.03, 0.02, 0.01, 0.0, 0.0, -0.03, -0.03])[dates.day_of_week.to_numpy()]
    log_mean = np.log(rng.uniform(30, 150)) + 0.12 * season + 0.0012 * (temperature - 18) ** 2 + weekday + coef * pm01
    mean = np.exp(log_mean)
    phi = 1.3
    shape = mean / (phi - 1)
    deaths = rng.poisson(mean * rng.gamma(shape, 1 / shape))
    pm_seen = np.round(pm, 1)
    pm_seen[rng.random(n_days) < missing] = np.nan
    return pd.DataFrame({"date": text.copy(), "deaths": deaths, "pm25": pm_seen, "temperature": temperature.round(1)})


def simulate_cities(
    n_cities: int = 20,
    years: float = 14,
    seed: int = 20261202,
    *,
    mean_coef: float = 0.0008,
    between_sd: float = 0.0004,
    vary_length: bool = True,
    broken: bool = False,
) -> CitiesScenario:
    """Simulate ``n_cities`` invented cities with known effects (see the module for the model).

    Parameters
    ----------
    n_cities : int
        Number of cities (the first 20 have names from :data:`CITY_NAMES`).
    years : float
        Length of the longest record; with ``vary_length`` each city has between half of it and all of it.
    seed : int
        Seed of ``numpy.random.default_rng``: the same seed gives the same cities.
    mean_coef, between_sd : float
        Mean and SD of the cities' true log relative risks per µg/m³ of the lag 0–1 mean PM2.5.
    vary_length : bool
        Different record lengths per city (else all have ``years``).
    broken : bool
        Record the last city's temperature in kelvins (data the model refuses).

    Examples
    --------
    >>> scenario = simulate_cities(n_cities=3, years=1, seed=1)
    >>> list(scenario.frames), scenario.mean_coef
    (['Alderwick', 'Brackenmoor', 'Caddon Ferry'], 0.0008)
    """
    if int(n_cities) != n_cities or n_cities < 1:
        raise SpecificationError(f"n_cities must be a positive whole number, got {n_cities!r}.")
    if not years * 365 >= 120:
        raise SpecificationError(f"years={years!r} gives too short a record; give at least a third of a year.")
    rng = np.random.default_rng(seed)
    names = _names(int(n_cities))
    coefs = rng.normal(mean_coef, between_sd, len(names))
    frames = {}
    for name, coef in zip(names, coefs, strict=True):
        share = rng.uniform(0.5, 1.0) if vary_length else 1.0
        frames[name] = _city(rng, round(years * 365.25 * share), float(coef), rng.uniform(0.0, 0.08))
    broken_city = names[-1] if broken else None
    if broken_city is not None:
        frames[broken_city] = frames[broken_city].assign(temperature=frames[broken_city]["temperature"] + 273.15)
    truth = pd.DataFrame({"city": names, "true_coef": coefs})
    return CitiesScenario(frames, truth, float(mean_coef), float(between_sd), broken_city)
