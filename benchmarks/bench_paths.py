"""Do the second fitting paths earn their lines? Their speed-up over plain single fits, one BLAS thread.

Run with ``python benchmarks/bench_paths.py [--repeats N]``. Not part of the test run. On the Norhaven sample
(``airhealth.load_sample()``, 14 years, the default model: time spline 7 df/year, temperature splines,
weekday; quasi-Poisson; pm25) and the 12 lag structures of ``run_benchmarks.GRID`` (plus ``dl0-5``), with
the designs and the confounder block prebuilt, it times, all with one BLAS thread:

* plain: one :func:`airhealth.model.engine.irls.fit_glm` per structure (what a single fit does);
* exposure-only path (``grid_inference``): the confounder-only fit once, then ``fit_exposure_only`` per
  structure (the exposure block only: what ``compare`` needs).

Each path's figure is the plain time over its time; the alternatives run back to back, repeated, so
machine load affects them alike. The largest coefficient difference from the plain fits (in standard errors)
is printed as a check that the paths give the same answer. A second path that returned full results this
way (``fit_with_exposure``, for ``compare_results``) measured 1.05-1.15x here and was folded back into the
plain fit (see benchmarks/README.md).
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # this checkout of airhealth

import airhealth
from airhealth._threads import single_threaded_blas
from airhealth.model.design import build_design, cached_confounders, model_frame
from airhealth.model.engine.grid import fit_confounders
from airhealth.model.engine.grid_inference import fit_exposure_only
from airhealth.model.engine.irls import fit_glm
from airhealth.model.spec import ModelSpec

GRID = ["0", "1", "2", "3", "4", "5", "6", "7", "0-1", "0-2", "0-3", "0-5", "dl0-5"]
OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}


def prebuilt(data):
    """Designs of every structure, the shared confounder block and the confounder-only fit's rows."""
    specs = [ModelSpec.from_options(lag=lag, **OPTIONS) for lag in GRID]
    frame = model_frame(data, max(specs, key=lambda s: s.lag.max_lag))
    conf = cached_confounders(frame, specs[0])
    designs = [build_design(frame, spec, conf) for spec in specs]
    y = frame[OPTIONS["outcome"]].to_numpy(dtype=float, na_value=np.nan)
    rows = conf.complete & np.isfinite(y)
    return designs, conf, y, rows


def paths(designs, conf, y, rows):
    Z = conf.matrix[rows]

    def plain():
        return [fit_glm(d.matrix, d.response) for d in designs]

    def exposure_only():
        base = fit_confounders(Z, y[rows])
        return [fit_exposure_only(base, d.exposure_values[rows], d.used[rows]) for d in designs]

    return {"plain": plain, "exposure-only (grid_inference)": exposure_only}


def timed(functions, repeats):
    times = {name: [] for name in functions}
    for _ in range(repeats):
        for name, fn in functions.items():
            t0 = time.perf_counter()
            fn()
            times[name].append(time.perf_counter() - t0)
    return {name: float(np.median(v)) for name, v in times.items()}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=9)
    args = parser.parse_args()
    print(f"{os.cpu_count()} CPUs; load average {os.getloadavg()[0]:.1f}; one BLAS thread; {len(GRID)} structures")
    with single_threaded_blas():
        designs, conf, y, rows = prebuilt(airhealth.load_sample())
        functions = paths(designs, conf, y, rows)
        results = {name: fn() for name, fn in functions.items()}
        medians = timed(functions, args.repeats)
    k = [d.exposure_slice.stop - d.exposure_slice.start for d in designs]
    for name, fits in results.items():
        worst = max(
            float(np.max(np.abs(f.coef[-kk:] - p.coef[-kk:]) / p.std_err[-kk:]))
            for f, p, kk in zip(fits, results["plain"], k, strict=True)
        )
        speedup = medians["plain"] / medians[name]
        print(f"{name:32s} {medians[name] * 1e3:8.1f} ms  speed-up over plain {speedup:5.2f}x  "
              f"largest exposure-coefficient difference {worst:.1e} SE")  # fmt: skip
    print(f"load average at the end {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
