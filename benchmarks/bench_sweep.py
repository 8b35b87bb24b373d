"""A 9-value sweep of the time df against 9 statsmodels fits on the same designs, in the same run.

Run with ``python benchmarks/bench_sweep.py [--repeats N]``. Not part of the test run. On the Norhaven sample
(``airhealth.load_sample()``, 14 years, 5,113 days; the default model: time spline, temperature splines of
the same day and lags 1–3, weekday; quasi-Poisson; pm25 at lag 0–1) it times, for ``trend_df_per_year`` =
4, 5, ..., 12:

* ``sweep``: :func:`airhealth.studies.sweep.sweep` from the data frame (validation, 9 designs, 9 fits, the
  warnings and the table);
* ``sensitivity``: :func:`airhealth.sensitivity` with the same 9 values (plus the main model's fit: 10 fits);
* ``choose_time_df``: :func:`airhealth.choose_time_df` over the same values (9 fits and their residual PACF);
* the reference: ``statsmodels`` ``GLM(Poisson).fit(scale="X2", tol=1e-10)`` on the 9 prebuilt designs
  (the matrices alone: its time excludes building them).

Each is timed with the BLAS library's own threads (as a user calls it) and with one BLAS thread for the whole
process (threadpoolctl), the functions in turn within every repeat after a short pause
(``run_benchmarks.paired_medians``); ratios are statsmodels' median over ours, in the same run and setting.
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # this checkout of airhealth
sys.path.insert(0, str(Path(__file__).resolve().parent))

from run_benchmarks import design_for, paired_medians, statsmodels_fit

import airhealth
from airhealth._threads import single_threaded_blas
from airhealth.studies.sweep import sweep

DF_VALUES = [4, 5, 6, 7, 8, 9, 10, 11, 12]
OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature", "lag": "0-1"}


def functions(data):
    designs = [design_for(data, lag="0-1", trend_df_per_year=v) for v in DF_VALUES]

    def quietly(fn):
        def run():
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                return fn()

        return run

    return {
        "statsmodels x9": quietly(lambda: [statsmodels_fit(d.matrix, d.response) for d in designs]),
        "sweep": quietly(lambda: sweep(data, "trend_df_per_year", DF_VALUES, **OPTIONS)),
        "sensitivity": quietly(lambda: airhealth.sensitivity(data, checks={"trend_df_per_year": DF_VALUES}, **OPTIONS)),
        "choose_time_df": quietly(lambda: airhealth.choose_time_df(data, values=DF_VALUES, **OPTIONS)),
    }


def report(label, medians):
    reference = medians["statsmodels x9"]
    print(f"\n{label}")
    for name, seconds in medians.items():
        ratio = "" if name == "statsmodels x9" else f"   statsmodels / this = {reference / seconds:5.1f}x"
        print(f"  {name:<16} {seconds * 1e3:9.1f} ms{ratio}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()
    data = airhealth.load_sample()
    fns = functions(data)
    for fn in fns.values():  # warm up (imports, caches of the validated frame and spline bases)
        fn()
    report("default BLAS threads", paired_medians(fns, args.repeats))
    with single_threaded_blas():
        report("one BLAS thread", paired_medians(fns, args.repeats))


if __name__ == "__main__":
    main()
