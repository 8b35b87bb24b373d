"""All engine benchmarks of issue 4 in one run, with a summary table of goal against measured.

Run with ``python benchmarks/run_benchmarks.py [--repeats N] [--cities 50,100,200]``.
Not part of the test run. The data are the invented Norhaven sample (``airhealth.load_sample()``, 14 years)
and cities invented by ``airhealth.simulate.simulate_city``. Every figure is the median of repeated runs
(the machine is shared, so single timings are noisy); airhealth and the reference run one after another
in the same process on the same design matrix, so their ratio is less affected by load than either time.

Every figure is measured twice in the same run: as a user calls it (the BLAS library's own thread count;
airhealth's fitting path then picks its threads itself, see airhealth._threads) and with one BLAS thread for
the whole process (threadpoolctl), so references such as statsmodels run single-threaded too. R's
``glm.fit`` is timed inside R (``system.time`` over repeats, same design written to a binary file) when
Rscript is on PATH.
"""

from __future__ import annotations

import argparse
import contextlib
import gc
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
import tracemalloc
import warnings
from pathlib import Path

import numpy as np
import statsmodels.api as sm

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))  # this checkout of airhealth
sys.path.insert(0, str(Path(__file__).resolve().parent))  # bench_engine, bench_paths
import bench_paths
from bench_engine import median_time, plain_irls

import airhealth
from airhealth._threads import single_threaded_blas
from airhealth.model.bases.splines import NaturalSplineBasis
from airhealth.model.design import build_confounders, build_design, clear_cache, model_frame
from airhealth.model.engine.irls import fit_glm
from airhealth.model.fitting import fit_design, result_from_fit, warn_if_suspicious
from airhealth.model.spec import ModelSpec
from airhealth.simulate import simulate_city
from airhealth.studies.compare import compare
from airhealth.studies.sweep import sweep

GRID = ["0", "1", "2", "3", "4", "5", "6", "7", "0-1", "0-2", "0-3", "0-5"]
DF_VALUES = [4, 5, 6, 7, 8, 9, 10, 11, 12]
OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}
#: Repeats of the slow statsmodels grids and sweeps (set per mode: with the library's default threads on a
#: busy machine one statsmodels fit can take seconds).
REFERENCE_REPEATS = {"value": 3}

R_SCRIPT = r"""
args <- commandArgs(trailingOnly = TRUE)
n <- as.integer(args[2]); p <- as.integer(args[3]); repeats <- as.integer(args[4])
con <- file(args[1], "rb"); X <- matrix(readBin(con, "double", n * p), n, p); y <- readBin(con, "double", n)
close(con)
ctl <- glm.control(epsilon = 1e-10, maxit = 100)
fit <- glm.fit(X, y, family = quasipoisson(), control = ctl)
times <- replicate(repeats, system.time(glm.fit(X, y, family = quasipoisson(), control = ctl))[["elapsed"]])
cat(median(times), fit$coefficients[p], "\n")
"""


def design_for(data, **options):
    spec = ModelSpec.from_options(**{**OPTIONS, **options})
    return build_design(model_frame(data, spec), spec)


def statsmodels_fit(X, y):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return sm.GLM(y, X, family=sm.families.Poisson()).fit(scale="X2", tol=1e-10)


def r_glm_fit(X, y, repeats):
    """Median seconds per ``glm.fit`` measured inside R, or None without Rscript."""
    rscript = shutil.which("Rscript")
    if rscript is None:
        return None
    with tempfile.TemporaryDirectory() as tmp:
        data, script = Path(tmp) / "design.bin", Path(tmp) / "time_glm.R"
        with open(data, "wb") as f:
            f.write(np.asfortranarray(X).tobytes(order="F"))
            f.write(np.ascontiguousarray(y, dtype=float).tobytes())
        script.write_text(R_SCRIPT)
        out = subprocess.run(
            [rscript, str(script), str(data), str(X.shape[0]), str(X.shape[1]), str(repeats)],
            capture_output=True, text=True, timeout=600, check=True,
        )  # fmt: skip
    seconds, last_coef = out.stdout.split()
    return float(seconds), float(last_coef)


#: Pause before each timed call of :func:`paired_medians`: after a multi-threaded BLAS call OpenBLAS's
#: worker threads spin for a while before they sleep, and would slow whatever is timed next.
SETTLE_SECONDS = 0.2


def paired_medians(functions: dict, repeats: int) -> dict[str, float]:
    """Median seconds of each function, run in turn within every repeat (load affects all alike), each
    started after a short pause (:data:`SETTLE_SECONDS`) so that none pays for the previous one's threads."""
    times: dict[str, list[float]] = {name: [] for name in functions}
    for _ in range(repeats):
        for name, fn in functions.items():
            time.sleep(SETTLE_SECONDS)
            t0 = time.perf_counter()
            fn()
            times[name].append(time.perf_counter() - t0)
    return {name: float(np.median(v)) for name, v in times.items()}


def quiet_fit(data, **options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return airhealth.fit(data, **{**OPTIONS, **options})


def bench_single(data, r, results):
    d = design_for(data, lag="0-1")
    X, y = d.matrix, d.response
    # two groups, each timed in turn within the group: airhealth's calls (which choose their BLAS threads)
    # and the references (which use the process's setting); a multi-threaded reference call leaves
    # spinning BLAS threads behind that would slow the next call timed, so airhealth's are not timed after one
    references = {"plain": lambda: plain_irls(X, y), "statsmodels": lambda: statsmodels_fit(X, y)}
    t = paired_medians(references, r)
    time.sleep(1.0)
    t.update(paired_medians({"fit": lambda: quiet_fit(data, lag="0-1"), "engine": lambda: fit_glm(X, y)}, r))
    ours = fit_glm(X, y)
    print(f"single fit {X.shape}: airhealth.fit from the data frame {t['fit'] * 1e3:.1f} ms, engine alone "
          f"(fit_glm) {t['engine'] * 1e3:.1f} ms, plain Cholesky IRLS {t['plain'] * 1e3:.1f} ms, statsmodels "
          f"GLM fit alone {t['statsmodels'] * 1e3:.1f} ms")  # fmt: skip
    results["single: statsmodels fit alone / airhealth.fit from data"] = (">= 10x", t["statsmodels"] / t["fit"])
    results["single: airhealth.fit from data / engine alone"] = ("<= 1.5", t["fit"] / t["engine"])
    results["single: statsmodels / engine alone"] = (">= 15x", t["statsmodels"] / t["engine"])
    results["single: engine alone / plain IRLS"] = ("<= 1.3", t["engine"] / t["plain"])
    rr = r_glm_fit(X, y, max(5, r))
    if rr is not None:
        agree = abs(rr[1] - ours.coef[-1]) / ours.std_err[-1]
        print(f"  R glm.fit {rr[0] * 1e3:.1f} ms (last coefficient differs by {agree:.1e} SE)")
        results["single: R glm.fit / engine alone"] = ("(reported)", rr[0] / t["engine"])
    return t["engine"]


def bench_parts(data, r, results):
    """Where the time of ``airhealth.fit`` outside the engine goes: each stage of ``fit_spec`` timed alone,
    in turn within every repeat and after the same pause as the single fits (so each starts as cold)."""
    spec = ModelSpec.from_options(lag="0-1", **OPTIONS)
    frame = model_frame(data, spec)
    design = build_design(frame, spec)
    glm = fit_design(design, spec)
    stages = {
        "validation (model_frame)": lambda: model_frame(data, spec),
        "design (build_design, block cached)": lambda: build_design(frame, spec),
        "engine (fit_design)": lambda: fit_design(design, spec),
        "warnings (warn_if_suspicious)": lambda: warn_if_suspicious(design, spec, glm.dispersion),
        "result (result_from_fit)": lambda: result_from_fit(design, spec, glm),
    }
    t = paired_medians(stages, r)
    total = sum(t.values())
    # a first fit on these data: no validated frame and no confounder block cached yet
    t_new = paired_medians({"new": lambda: (clear_cache(), quiet_fit(data, lag="0-1"))}, r)["new"]
    print(f"  airhealth.fit with the caches cleared (first fit on new data): {t_new * 1e3:.1f} ms")
    results["single: airhealth.fit, caches cleared (ms)"] = ("(reported)", t_new * 1e3)
    for name, seconds in t.items():
        print(f"  {name:38s} {seconds * 1e3:6.2f} ms  {100 * seconds / total:4.0f}%")
    outside = total - t["engine (fit_design)"]
    results["single: stages outside the engine (ms)"] = ("(reported)", outside * 1e3)


def bench_second_paths(data, r, results):
    """The exposure-only grid path against one plain fit per structure (benchmarks/bench_paths.py)."""
    designs, conf, y, rows = bench_paths.prebuilt(data)
    t = bench_paths.timed(bench_paths.paths(designs, conf, y, rows), max(3, r // 2))
    for name, value in t.items():
        if name != "plain":
            print(f"{name}: {value * 1e3:.1f} ms for {len(designs)} structures, plain fits {t['plain'] * 1e3:.1f} ms")
            results[f"{len(designs)} structures: plain fits / {name}"] = (">= 1.5", t["plain"] / value)


def bench_grid(data, r, results):
    designs = [design_for(data, lag=lag) for lag in GRID]
    t_cold = median_time(lambda: (clear_cache(), compare(data, GRID, **OPTIONS)), r)
    t_ours = median_time(lambda: compare(data, GRID, **OPTIONS), r)
    t_sm = median_time(lambda: [statsmodels_fit(d.matrix, d.response) for d in designs], REFERENCE_REPEATS["value"])
    table = compare(data, GRID, **OPTIONS)
    worst = max(
        abs(row.coef - statsmodels_fit(d.matrix, d.response).params[-1]) / row.se
        for row, d in zip(table.itertuples(), designs[:3], strict=False)
    )
    print(f"12-structure grid: airhealth.compare {t_cold * 1e3:.1f} ms cold (confounder block built), "
          f"{t_ours * 1e3:.1f} ms with the block cached (validation and exposure designs included), "
          f"12 statsmodels fits {t_sm * 1e3:.1f} ms (designs prebuilt); |diff| <= {worst:.1e} SE")  # fmt: skip
    results["grid of 12: statsmodels / compare (cold)"] = (">= 30x", t_sm / t_cold)
    results["grid of 12: statsmodels / compare (block cached)"] = (">= 30x", t_sm / t_ours)


def bench_sweep(data, r, results):
    designs = [design_for(data, lag="0-1", trend_df_per_year=v) for v in DF_VALUES]
    t_ours = median_time(lambda: sweep(data, "trend_df_per_year", DF_VALUES, lag="0-1", **OPTIONS), max(3, r // 2))
    t_sm = median_time(lambda: [statsmodels_fit(d.matrix, d.response) for d in designs], REFERENCE_REPEATS["value"])
    print(f"9-value df sweep: airhealth.sweep {t_ours * 1e3:.1f} ms, 9 statsmodels fits {t_sm * 1e3:.1f} ms")
    results["df sweep of 9: statsmodels / sweep"] = ("(reported)", t_sm / t_ours)


def bench_distributed(data, r, results):
    d = design_for(data, lag="dl0-5")
    X, y = d.matrix, d.response
    t_ours = median_time(lambda: fit_glm(X, y), r)
    t_sm = median_time(lambda: statsmodels_fit(X, y), REFERENCE_REPEATS["value"])
    t_full = median_time(lambda: airhealth.fit(data, lag="dl0-5", **OPTIONS), max(3, r // 2))
    print(f"distributed lag dl0-5 {X.shape}: airhealth {t_ours * 1e3:.1f} ms (airhealth.fit from the data "
          f"{t_full * 1e3:.1f} ms), statsmodels {t_sm * 1e3:.1f} ms")  # fmt: skip
    results["dl0-5: statsmodels / airhealth"] = ("(reported)", t_sm / t_ours)
    rr = r_glm_fit(X, y, 5)
    if rr is not None:
        results["dl0-5: R glm.fit / airhealth"] = ("(reported)", rr[0] / t_ours)


def bench_design(data, r, results, t_fit):
    t = np.arange(5000.0)
    t_basis = median_time(lambda: NaturalSplineBasis.from_values(t, df=98).evaluate(t), r)
    spec = ModelSpec.from_options(lag="0-1", **OPTIONS)
    frame = model_frame(data, spec)
    t_frame = median_time(lambda: model_frame(data, spec), r)
    t_conf = median_time(lambda: build_confounders(frame, spec), r)
    t_cold = median_time(lambda: (clear_cache(), build_design(model_frame(data, spec), spec)), r)
    t_design = median_time(lambda: build_design(model_frame(data, spec), spec), r)
    print(f"natural spline basis, 5,000 days x 98 df: {t_basis * 1e3:.2f} ms")
    print(f"design: validation {t_frame * 1e3:.1f} ms + confounders {t_conf * 1e3:.1f} ms; whole design "
          f"{t_cold * 1e3:.1f} ms cold = {100 * t_cold / t_fit:.0f}% of a fit ({t_fit * 1e3:.1f} ms), "
          f"{t_design * 1e3:.1f} ms = {100 * t_design / t_fit:.0f}% with the confounder block cached")  # fmt: skip
    results["spline basis 5,000 days (ms)"] = ("< 5", t_basis * 1e3)
    results["design construction / fit (%, cold)"] = ("< 20", 100 * t_cold / t_fit)
    results["design construction / fit (%, block cached)"] = ("< 20", 100 * t_design / t_fit)


def one_city(i: int):
    rng = np.random.default_rng(1000 + i)
    tables = simulate_city(
        rng, "2012-01-01", "2023-12-31", name=f"City {i}", pollution_scale=float(rng.uniform(0.6, 1.6)),
        temperature_offset=float(rng.normal(0, 4)),
    )  # fmt: skip
    return airhealth.align_daily(tables["counts"], tables["pollution"], tables["weather"])


def peak_resident_mib() -> float:
    """Peak resident memory of this process (``VmHWM``; ``ru_maxrss`` survives ``exec`` from the parent,
    so it would report the parent's peak)."""
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # KiB on Linux


def run_cities(counts: list[int]) -> dict:
    """Cities one after another in this process, keeping only the estimates (a small table per city).

    Returns the time and peak resident memory at each checkpoint, then the Python heap (tracemalloc)
    over 10 more cities: its peak shows what one city needs, its current size what is kept.
    """
    estimates, checkpoints = [], []
    t_sim = t_fit = 0.0
    for i in range(max(counts)):
        t0 = time.perf_counter()
        data = one_city(i)
        t1 = time.perf_counter()
        table = compare(data, GRID, **OPTIONS)
        t_fit += time.perf_counter() - t1
        t_sim += t1 - t0
        estimates.append(table[["lag", "coef", "se", "qaic", "n_days"]].assign(city=i))
        del data, table
        if i + 1 in counts:
            peak_rss = peak_resident_mib()
            checkpoints.append((i + 1, t_sim + t_fit, t_fit, peak_rss))
    gc.collect()
    tracemalloc.start()
    for i in range(10):
        estimates.append(compare(one_city(10_000 + i), GRID, **OPTIONS)[["lag", "coef", "se"]])
    current, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return {"checkpoints": checkpoints, "heap_current": current / 2**20, "heap_peak": peak / 2**20}


def bench_cities(counts: list[int], single: bool, results) -> None:
    """The many-city run in a fresh process, so its peak memory is its own."""
    command = [sys.executable, __file__, "--cities-only", ",".join(map(str, counts))]
    if single:
        command.append("--one-thread")
    out = subprocess.run(command, capture_output=True, text=True, check=True, timeout=3600)
    report = json.loads(out.stdout.strip().splitlines()[-1])
    for n, total, fit, rss in report["checkpoints"]:
        print(f"{n:4d} cities x 12 years x 12 structures: {total:6.1f} s in all ({fit:6.1f} s in compare, the"
              f" rest simulating); peak RSS of the process {rss:5.0f} MiB")  # fmt: skip
    print(f"  Python heap over 10 more cities: peak {report['heap_peak']:.1f} MiB, "
          f"{report['heap_current']:.2f} MiB still held (estimates; at most two cached confounder blocks)")  # fmt: skip
    n, total, _, rss = report["checkpoints"][-1]
    results[f"{n} cities x 12 y x 12-grid (s, incl. simulation)"] = ("< 30", total)
    results[f"{n} cities: peak RSS (MiB)"] = ("< 1024", rss)
    first = report["checkpoints"][0]
    results[f"peak RSS growth {first[0]} -> {n} cities (MiB)"] = ("~0 (flat)", rss - first[3])


MODES = {"default threads": False, "1 BLAS thread": True}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=9)
    parser.add_argument("--cities", default="50,100,200", help="checkpoints for the many-city run")
    parser.add_argument(
        "--single", action="store_true", help="only the single fit, its stages and the design (a few minutes)"
    )
    parser.add_argument("--cities-only", metavar="COUNTS", help=argparse.SUPPRESS)  # the child process
    parser.add_argument("--one-thread", action="store_true", help=argparse.SUPPRESS)  # the child process
    args = parser.parse_args()
    if args.cities_only:
        counts = sorted(int(c) for c in args.cities_only.split(","))
        with single_threaded_blas() if args.one_thread else contextlib.nullcontext():
            print(json.dumps(run_cities(counts)))
        return
    counts = sorted(int(c) for c in args.cities.split(","))
    print(f"airhealth {airhealth.__version__}; {os.cpu_count()} CPUs; load average {os.getloadavg()[0]:.1f}; "
          f"medians of {args.repeats} repeats unless stated")  # fmt: skip
    data = airhealth.load_sample()
    by_mode: dict[str, dict[str, tuple[str, float]]] = {}
    for mode, single in MODES.items():
        print(f"\n== {mode} (load average {os.getloadavg()[0]:.1f})")
        results: dict[str, tuple[str, float]] = {}
        REFERENCE_REPEATS["value"] = 3 if single else 1
        with single_threaded_blas() if single else contextlib.nullcontext():
            run(data, args.repeats, results, only_single=args.single)
        if not args.single:
            bench_cities(counts, single, results)
        by_mode[mode] = results
    print(f"\nload average at the end {os.getloadavg()[0]:.1f}\n")
    print(f"{'figure':58s} {'goal':>10s} " + " ".join(f"{m:>16s}" for m in MODES))
    for name, (goal, _) in by_mode["default threads"].items():
        values = " ".join(f"{by_mode[m].get(name, (goal, float('nan')))[1]:16.2f}" for m in MODES)
        print(f"{name:58s} {goal:>10s} {values}")


def run(data, r, results, only_single: bool = False) -> None:
    t_fit = bench_single(data, r, results)
    bench_parts(data, r, results)
    if only_single:
        bench_design(data, r, results, t_fit)
        return
    bench_second_paths(data, r, results)
    bench_grid(data, r, results)
    bench_sweep(data, r, results)
    bench_distributed(data, r, results)
    bench_design(data, r, results, t_fit)


if __name__ == "__main__":
    main()
