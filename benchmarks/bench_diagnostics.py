"""Timing of diagnostics and Newey-West intervals on the 14-year sample (issue 9's "well under 0.5 s").

Run with ``python benchmarks/bench_diagnostics.py [--repeats N]``. Not part of the test run. Prints median
wall times of

* one default fit and one ``interval="hac"`` fit by :func:`airhealth.fit` (the HAC sandwich is the extra),
* :func:`airhealth.diagnose` of the default fit (residual ACF/PACF to lag 30, leverage, Cook's distance,
  variance inflation, verdict),
* statsmodels ``GLM(...).fit(cov_type="HAC")`` on the same design and counts, as the reference library.

The data are the invented Norhaven sample (``airhealth.load_sample()``, 4946 days used, 118 columns).
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import statsmodels.api as sm

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # this checkout of airhealth
import airhealth

OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}


def median_time(run, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        run()
        times.append(time.perf_counter() - start)
    return float(np.median(times))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=7)
    repeats = parser.parse_args().repeats
    data = airhealth.load_sample()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = airhealth.fit(data, **OPTIONS)
        airhealth.diagnose(result)  # warm-up (imports, first BLAS calls)
        design, counts = result.design_matrix.to_numpy(), result.observed.to_numpy()
        lags = airhealth.fit(data, interval="hac", **OPTIONS).hac_lags
        rows = {
            "fit, default interval": median_time(lambda: airhealth.fit(data, **OPTIONS), repeats),
            "fit, interval='hac'": median_time(lambda: airhealth.fit(data, interval="hac", **OPTIONS), repeats),
            "diagnose(result)": median_time(lambda: airhealth.diagnose(result), repeats),
            f"statsmodels GLM HAC (maxlags={lags})": median_time(
                lambda: sm.GLM(counts, design, family=sm.families.Poisson()).fit(
                    cov_type="HAC", cov_kwds={"maxlags": lags}
                ),
                repeats,
            ),
        }
    print(f"{result.n_days} days used, {design.shape[1]} columns, median of {repeats} runs")
    for name, seconds in rows.items():
        print(f"  {name:<40} {seconds * 1000:8.1f} ms")


if __name__ == "__main__":
    main()
