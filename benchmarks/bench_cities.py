"""The first stage over many cities: serial, the local process pool and a dask LocalCluster.

Run with ``python benchmarks/bench_cities.py [--cities 100,1000] [--years 14] [--modes serial,local,dask]``.
Not part of the test run. The cities are invented (:func:`airhealth.cities.simulate_cities.simulate_cities`,
all with ``years`` of daily data) and written to one long Parquet file per size, sorted by city with one row
group per city, so that each worker reads only its own city's rows (``fit_cities(path, city="city")``), as
large multi-city data arrive. For each size and mode it reports the wall time of ``fit_cities`` (the dask
cluster's start-up is timed apart), the time per city, and the peak memory (proportional set size) summed
over this process and all its child processes (psutil, sampled every 200 ms), then the ratios the aims are stated in:
dask against the local pool, and the time at the largest size against the smallest.

Model: quasi-Poisson, lag 0-1 mean PM2.5, natural splines of time (7 df/year) and temperature (same day and
lags 1-3), day of week — the defaults of ``airhealth.fit``.
"""

from __future__ import annotations

import argparse
import os
import tempfile
import threading
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import pandas as pd
import psutil

import airhealth
from airhealth._threads import worker_initializer
from airhealth.cities.simulate_cities import simulate_cities

MODEL = {"outcome": "deaths", "exposure": "pm25", "temperature": "temperature"}


def _memory(process: psutil.Process) -> int:
    """Proportional set size (shared pages divided among the processes sharing them; forked workers share
    the parent's pages), or the resident set size where the system does not give it."""
    try:
        return process.memory_full_info().pss
    except (AttributeError, psutil.AccessDenied):
        return process.memory_info().rss


class PeakMemory:
    """Peak of the summed memory (PSS) of this process and its children (recursive), sampled in a thread."""

    def __init__(self, interval: float = 0.2) -> None:
        self.interval, self.peak, self._stop = interval, 0, threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def _total(self) -> int:
        me = psutil.Process()
        total = _memory(me)
        for child in me.children(recursive=True):
            try:
                total += _memory(child)
            except psutil.Error:  # a worker that ended between listing and reading
                pass
        return total

    def _run(self) -> None:
        while not self._stop.is_set():
            self.peak = max(self.peak, self._total())
            self._stop.wait(self.interval)

    def __enter__(self) -> PeakMemory:
        self.peak = self._total()
        self._thread.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self._stop.set()
        self._thread.join()


def write_cities(n: int, years: float, folder: Path) -> Path:
    """Simulate ``n`` cities and write them as one long Parquet file, one row group per city."""
    scenario = simulate_cities(n_cities=n, years=years, seed=20261202, vary_length=False)
    rows = len(next(iter(scenario.frames.values())))
    path = folder / f"cities_{n}.parquet"
    long = scenario.long()
    long["date"] = pd.to_datetime(long["date"])  # Parquet carries typed dates (text dates cost ~40 ms/city to parse)
    long.to_parquet(path, index=False, row_group_size=rows)
    return path


def timed(path: Path, executor, label: str, n: int) -> dict:
    with PeakMemory() as memory:
        baseline = memory.peak
        start = time.perf_counter()
        table = airhealth.fit_cities(path, executor, city="city", show_progress=False, **MODEL)
        wall = time.perf_counter() - start
    failed = int((table.error != "").sum())
    row = {"mode": label, "cities": n, "wall_s": wall, "peak_mb": memory.peak / 2**20, "start_mb": baseline / 2**20}
    print(
        f"{label:>7} {n:>6} cities: {wall:8.1f} s  ({1000 * wall / n:6.1f} ms/city)  peak memory "
        f"{row['peak_mb']:6.0f} MB (at start {row['start_mb']:4.0f} MB)  failed {failed}",
        flush=True,
    )
    return row


def _import_airhealth() -> None:
    import pyarrow.dataset  # noqa: F401

    import airhealth.cities.first_stage  # noqa: F401


def run_dask(paths: dict[int, Path]) -> list[dict]:
    from distributed import Client, LocalCluster

    start = time.perf_counter()
    cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None, silence_logs=40)
    client = Client(cluster, set_as_default=False)
    client.run(worker_initializer)  # one BLAS thread per worker, as the local pool's initializer does
    client.run(_import_airhealth)  # the local pool's forked workers start with airhealth imported; so do these
    print(f"   dask cluster of 2 worker processes started in {time.perf_counter() - start:.1f} s", flush=True)
    try:
        return [timed(path, client.get_executor(), "dask", n) for n, path in paths.items()]
    finally:
        client.close()
        cluster.close()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cities", default="100,1000", help="numbers of cities, comma-separated")
    parser.add_argument("--years", type=float, default=14)
    parser.add_argument("--modes", default="serial,local,dask")
    args = parser.parse_args()
    sizes = sorted(int(x) for x in args.cities.split(","))
    modes = args.modes.split(",")
    print(f"cores: {os.cpu_count()}, load average: {os.getloadavg()}", flush=True)
    results: list[dict] = []
    with tempfile.TemporaryDirectory() as tmp:
        start = time.perf_counter()
        with ProcessPoolExecutor(1) as writer:  # simulate in another process: this one never holds the data
            paths = {n: writer.submit(write_cities, n, args.years, Path(tmp)).result() for n in sizes}
        print(f"simulated and wrote {sizes} cities x {args.years:g} years in {time.perf_counter() - start:.0f} s")
        for mode in modes:
            if mode == "dask":
                results += run_dask(paths)
            else:
                executor = "serial" if mode == "serial" else None
                results += [timed(path, executor, mode, n) for n, path in paths.items()]
    by = {(r["mode"], r["cities"]): r for r in results}
    big, small = sizes[-1], sizes[0]
    for mode in modes:
        if (mode, big) in by and (mode, small) in by and big != small:
            ratio = by[mode, big]["wall_s"] / by[mode, small]["wall_s"]
            print(f"{mode}: time at {big} / at {small} cities = {ratio:.2f} (linear would be {big / small:g})")
    if ("dask", big) in by and ("local", big) in by:
        print(f"dask / local pool at {big} cities = {by['dask', big]['wall_s'] / by['local', big]['wall_s']:.2f}")
    print(f"load average at the end: {os.getloadavg()}")


if __name__ == "__main__":
    main()
