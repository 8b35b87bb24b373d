"""How many BLAS threads make one fit fastest, over a range of design sizes (n days x p columns).

Run with ``python benchmarks/bench_threads.py [--repeats N] [--rows 1000,5000,20000] [--columns 20,120,400]``.
Not part of the test run. For every size it times :func:`airhealth.model.engine.irls.fit_glm` (quasi-Poisson, the
default family) with the fitting path's thread policy switched off, once with one BLAS thread and once with
the BLAS library's own thread count (as a user's process starts), alternating the two so that machine load
affects both alike, and prints the medians, their ratio, the thread count the policy
(:func:`airhealth._threads.fitting_blas_threads`) picks and the machine's load average. The data are
invented: a spline-like random design with an intercept and Poisson counts with mean about 30.
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np
from threadpoolctl import ThreadpoolController

from airhealth import _threads
from airhealth.model.engine.irls import fit_glm


def invented_design(n: int, p: int, seed: int = 7) -> tuple[np.ndarray, np.ndarray]:
    """An ``n x p`` column-major design (intercept + smooth random columns) and counts with mean ~30."""
    rng = np.random.default_rng(seed)
    t = np.linspace(0, 1, n)
    X = np.empty((n, p), order="F")
    X[:, 0] = 1.0
    for j in range(1, p):
        X[:, j] = np.sin(np.pi * j * t + rng.uniform(0, 2 * np.pi)) + 0.3 * rng.normal(size=n)
    coef = np.r_[np.log(30), rng.normal(0, 0.3 / np.sqrt(p), p - 1)]
    y = rng.poisson(np.exp(X @ coef)).astype(float)
    return X, y


def paired_medians(fn, repeats: int, threads: int) -> tuple[float, float]:
    """Median seconds of ``fn`` with ``threads`` BLAS threads and with one, alternating the two."""
    controller = ThreadpoolController().select(user_api="blas")
    many, one = [], []
    for _ in range(repeats):
        for limit, store in ((threads, many), (1, one)):
            with controller.limit(limits=limit):
                t0 = time.perf_counter()
                fn()
                store.append(time.perf_counter() - t0)
    return float(np.median(many)), float(np.median(one))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--rows", default="1000,5000,20000,50000")
    parser.add_argument("--columns", default="20,60,120,250,500")
    args = parser.parse_args()
    default = max(d["num_threads"] for d in ThreadpoolController().select(user_api="blas").info())
    print(f"{os.cpu_count()} CPUs; BLAS default {default} threads; load average {os.getloadavg()[0]:.1f}")
    header = ("n", "p", "default ms", "1 thread ms", "default/1", "policy", "load")
    print(" ".join(f"{h:>{w}s}" for h, w in zip(header, (7, 5, 11, 12, 10, 7, 5), strict=True)))
    _threads.POLICY_ENABLED = False  # time the engine at the thread counts set here
    try:
        for n in (int(v) for v in args.rows.split(",")):
            for p in (int(v) for v in args.columns.split(",")):
                if p >= n // 4:
                    continue
                X, y = invented_design(n, p)
                fit_glm(X, y)  # warm the work buffers
                many, one = paired_medians(lambda X=X, y=y: fit_glm(X, y), args.repeats, default)
                policy = _threads.fitting_blas_threads(n, p)
                print(f"{n:7d} {p:5d} {many * 1e3:11.1f} {one * 1e3:12.1f} {many / one:10.2f} "
                      f"{'lib' if policy is None else policy:>7} {os.getloadavg()[0]:5.1f}")  # fmt: skip
    finally:
        _threads.POLICY_ENABLED = True


if __name__ == "__main__":
    main()
