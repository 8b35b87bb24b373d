"""Timing of a 12-structure lag comparison against the same models fitted one by one with statsmodels.

Run with ``python benchmarks/bench_compare.py [--repeats N]``. Not part of the test run. Data: one invented
city simulated by :func:`airhealth.simulate.simulate_city` (14 years, 2010-2023, fixed seed), aligned by
:func:`airhealth.align_daily`. Models: the default model (time spline 7 df/year, temperature splines of the
same day and of lags 1-3, weekday; quasi-Poisson) with pm25 at lags 0-5, moving averages 0-1, 0-2, 0-3, 0-5
and unconstrained distributed lags 0-3 and 0-5, on the days usable by all of them (``common_days=True``, the
default).

Timed, median of the repeats, one after the other in the same run:

* ``airhealth.compare(data, lags, ...)`` from the data frame, with the caches cleared before each call
  (validation, the confounder block, each structure's design and checks, the fits, the table with both QAIC
  columns);
* the reference: ``statsmodels`` ``GLM(y, X, family=Poisson()).fit(scale="X2", tol=1e-10)`` once per structure
  on the same design matrices and days, *prebuilt* outside the timing (so the ratio is conservative).

Both at the BLAS library's default threads and with one thread for the whole process (threadpoolctl).
The largest difference between the two estimates, in standard errors, is printed as a check that the
same models were fitted.
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import statsmodels.api as sm
from threadpoolctl import threadpool_info, threadpool_limits

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # this checkout of airhealth
import airhealth
from airhealth.model.design import clear_cache
from airhealth.simulate import simulate_city
from airhealth.studies.compare import compare, compare_results

LAGS = ["0", "1", "2", "3", "4", "5", "0-1", "0-2", "0-3", "0-5", "dl0-3", "dl0-5"]
OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}


def city():
    """Fourteen years of one invented city (seed fixed)."""
    tables = simulate_city(seed=20261202, start="2010-01-01", end="2023-12-31")
    return airhealth.align_daily(tables["counts"], tables["pollution"], tables["weather"])


def median_time(run, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        time.sleep(0.2)  # no call pays for the previous one's spinning BLAS threads
        start = time.perf_counter()
        run()
        times.append(time.perf_counter() - start)
    return float(np.median(times))


def statsmodels_fits(designs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return [sm.GLM(y, X, family=sm.families.Poisson()).fit(scale="X2", tol=1e-10) for X, y in designs]


def ours(data):
    clear_cache()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return compare(data, LAGS, **OPTIONS)


def measure(data, designs, repeats: int) -> tuple[float, float, float]:
    """(airhealth seconds, statsmodels seconds, largest |difference| of the cumulative estimate in SE)."""
    table = ours(data)  # warm-up (imports, first BLAS calls)
    fits = statsmodels_fits(designs)
    worst = 0.0
    for row, fit, lag in zip(table.itertuples(), fits, LAGS, strict=True):
        k = 6 if lag == "dl0-5" else 4 if lag == "dl0-3" else 1
        worst = max(worst, abs(row.coef - float(np.sum(fit.params[-k:]))) / row.se)
    t_ours = median_time(lambda: ours(data), repeats)
    t_sm = median_time(lambda: statsmodels_fits(designs), repeats)
    return t_ours, t_sm, worst


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    repeats = parser.parse_args().repeats
    data = city()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        results = compare_results(data, LAGS, common_days=True, **OPTIONS)
    designs = [(np.asarray(r.design_matrix), r.observed.to_numpy()) for r in results]
    n, p = designs[0][0].shape
    threads = max((i.get("num_threads", 1) for i in threadpool_info()), default=1)
    print(f"{len(LAGS)} structures, {n} common days, {p}-{max(X.shape[1] for X, _ in designs)} columns")
    for label, limit in ((f"default threads ({threads})", None), ("one BLAS thread", 1)):
        with threadpool_limits(limits=limit):
            t_ours, t_sm, worst = measure(data, designs, repeats)
        print(
            f"{label:22s} airhealth.compare {t_ours * 1e3:7.0f} ms   statsmodels one by one {t_sm * 1e3:7.0f} ms   "
            f"ratio {t_sm / t_ours:5.1f}x   |diff| <= {worst:.1e} SE"
        )


if __name__ == "__main__":
    main()
