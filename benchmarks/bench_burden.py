"""Timing of attributable burden with 10,000 Monte Carlo draws on the 14-year sample (issue 11: "well under a second").

Run with ``python benchmarks/bench_burden.py [--repeats N] [--draws S]``. Not part of the test run. Prints median
wall times, with the library's default BLAS threads and with one BLAS thread (threadpoolctl), of

* :func:`airhealth.burden.burden` for a fitted single-coefficient model (lag 0-1, from the fit's own days) and
  a distributed lag (``dl0-21:spline4``, backward perspective, from the data): the whole call (frame checks,
  contrast rows, draws, breakdown tables);
* the reference in the same run: the same Monte Carlo computed one draw at a time (a Python loop over draws,
  each a matrix-vector product over the days), i.e. the obvious implementation the matrix form replaces.

The data are the invented Norhaven sample (``airhealth.load_sample()``, 5,113 days).
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

import numpy as np
from threadpoolctl import threadpool_limits

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # this checkout of airhealth
import airhealth
from airhealth.burden import burden
from airhealth.burden.excess import frame_rows
from airhealth.model.lag_predictions import find_lag_term

OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}


def median_time(run, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        run()
        times.append(time.perf_counter() - start)
    return float(np.median(times))


def loop_reference(result, data, draws: int, seed: int) -> np.ndarray:
    """AN for each draw, one draw at a time (the reference: same maths, a Python loop over draws)."""
    term = find_lag_term(result)
    dates = data["date"]
    x, y = data["pm25"].to_numpy(float), data["deaths_all"].to_numpy(float)
    part = frame_rows(dates, x, y, term.basis, 10.0, "above", "backward")
    rng = np.random.default_rng(seed)
    thetas = rng.multivariate_normal(term.coef, term.cov, size=draws)
    return np.array([np.sum(part.cases * -np.expm1(-(part.rows @ t))) for t in thetas])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--draws", type=int, default=10_000)
    args = parser.parse_args()
    data = airhealth.load_sample()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        single = airhealth.fit(data, lag="0-1", **OPTIONS)
        spread = airhealth.fit(data, lag="dl0-21:spline4", **OPTIONS)
    cases = {
        "lag 0-1 (fit's own days)": (single, None),
        "dl0-21:spline4 (from the data)": (spread, data),
    }
    print(f"burden, {args.draws} draws, 14 years ({len(data)} days); median of {args.repeats}")
    for threads in (None, 1):
        with threadpool_limits(limits=threads):
            label = "default threads" if threads is None else "one BLAS thread"
            for name, (result, frame) in cases.items():
                burden(result, 10, data=frame, draws=args.draws)  # warm-up
                ours = median_time(lambda r=result, f=frame: burden(r, 10, data=f, draws=args.draws), args.repeats)
                ref = median_time(lambda r=result: loop_reference(r, data, args.draws, 1), max(1, args.repeats // 2))
                print(
                    f"  {label:16s} {name:32s} burden() {ours * 1000:7.1f} ms | loop over draws {ref * 1000:7.1f} ms"
                    f" | ratio {ref / ours:5.1f}x"
                )


if __name__ == "__main__":
    main()
