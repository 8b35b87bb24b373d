"""Write ``norhaven_hourly_no2.csv``: invented hourly NO2 (ppb) at three monitors in Norhaven, 2022–2023.

Norhaven is a fictional city; these numbers are simulated and describe no real place. The series has a
winter-high seasonal cycle, morning and evening traffic peaks, quieter weekends, weather shared by all
monitors (a slowly varying city-wide component) and noise of each monitor's own. Outages are of three kinds:
multi-day instrument failures (rows absent), logger resets losing 3–12 hours and single missing hours
(values left empty), and a nightly
calibration hour at the park monitor on about one day in ten. The park monitor starts in mid-March 2022 and
is out for four months in 2023, so its completeness screening by year has something to do.

Timestamps mark the start of each hour in local standard time (UTC+1 all year, no daylight saving).
Run from anywhere: ``python sample_data/generate_hourly.py``. Fixed seed, so the file is reproducible.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from airhealth._io import write_with

SEED = 20240605
OUT = Path(__file__).with_name("norhaven_hourly_no2.csv")
PACKAGE_COPY = Path(__file__).resolve().parents[1] / "airhealth" / "data" / OUT.name
# monitor id: (log mean level, rush-hour amplitude, own-noise SD)
MONITORS = {"NHC": (2.65, 0.45, 0.25), "NHH": (3.05, 0.60, 0.30), "NHP": (2.10, 0.30, 0.30)}
OUTAGES = {  # (first day, days) of multi-day failures, rows absent
    "NHC": [("2022-07-04 10:00", 6), ("2023-02-13 15:00", 12), ("2023-10-02 07:00", 3)],
    "NHH": [("2022-11-21 13:00", 9), ("2023-05-08 02:00", 4)],
    "NHP": [("2022-01-01 00:00", 73), ("2022-09-12 20:00", 5), ("2023-04-03 09:00", 122)],
}
SHORT_OUTAGES = 40  # per monitor: logger resets losing 3-12 consecutive hours (values left empty)


def _ar1(rng: np.random.Generator, n: int, rho: float, sd: float) -> np.ndarray:
    shocks = rng.normal(0.0, sd * np.sqrt(1 - rho**2), n)
    out = np.empty(n)
    out[0] = rng.normal(0.0, sd)
    for i in range(1, n):
        out[i] = rho * out[i - 1] + shocks[i]
    return out


def simulate(seed: int = SEED) -> pd.DataFrame:
    """Return the simulated readings as a long frame: ``time``, ``monitor``, ``no2_ppb``."""
    rng = np.random.default_rng(seed)
    hours = pd.date_range("2022-01-01 00:00", "2023-12-31 23:00", freq="h")
    doy, hod = hours.day_of_year.to_numpy(), hours.hour.to_numpy()
    weekend = hours.day_of_week.to_numpy() >= 5
    season = 0.35 * np.cos(2 * np.pi * (doy - 15) / 365.25)
    rush = np.exp(-0.5 * ((hod - 8) / 1.5) ** 2) + 0.8 * np.exp(-0.5 * ((hod - 17.5) / 2.0) ** 2)
    weather = _ar1(rng, len(hours), rho=0.985, sd=0.35)
    frames = []
    for name, (level, amplitude, noise) in MONITORS.items():
        log_conc = (
            level
            + season
            + amplitude * rush * np.where(weekend, 0.5, 1.0)
            + weather
            + _ar1(rng, len(hours), rho=0.85, sd=noise)
        )
        frame = pd.DataFrame({"time": hours, "monitor": name, "no2_ppb": np.round(np.exp(log_conc), 1)})
        frame.loc[rng.random(len(frame)) < 0.02, "no2_ppb"] = np.nan
        for first, length in zip(
            rng.integers(0, len(frame) - 12, SHORT_OUTAGES), rng.integers(3, 13, SHORT_OUTAGES), strict=True
        ):
            frame.loc[first : first + length - 1, "no2_ppb"] = np.nan
        if name == "NHP":
            calibration = (hod == 3) & np.isin(hours.normalize(), rng.choice(hours.normalize(), 70))
            frame.loc[calibration, "no2_ppb"] = np.nan
        absent = np.zeros(len(frame), dtype=bool)
        for first, days in OUTAGES[name]:
            start = pd.Timestamp(first)
            absent |= (hours >= start) & (hours < start + pd.Timedelta(days=days))
        frames.append(frame[~absent])
    return pd.concat(frames, ignore_index=True)


def main() -> None:
    data = simulate()
    for path in (OUT, PACKAGE_COPY):
        write_with(path, lambda tmp: data.to_csv(tmp, index=False, date_format="%Y-%m-%d %H:%M"))
        print(f"wrote {path} ({len(data)} rows, {path.stat().st_size / 1e6:.2f} MB)")


if __name__ == "__main__":
    main()
