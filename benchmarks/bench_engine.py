"""Timing of the GLM engine on a realistic 14-year daily design (~118 columns).

Run with ``python benchmarks/bench_engine.py [--repeats N]``. Prints median wall times of

* one quasi-Poisson fit by :func:`airhealth.model.engine.irls.fit_glm`,
* a plain numpy/scipy Cholesky IRLS written here as the lower bound for a straightforward implementation,
* one statsmodels GLM fit with its default settings (the reference library),
* a 12-structure lag grid through :func:`airhealth.model.engine.grid_inference.fit_exposure_only` (the exposure
  block, as ``compare`` reports it), against 12 statsmodels fits and 12 cold ``fit_glm`` fits,

and the ratios between them, plus what threadpoolctl reports about the BLAS in use. By default everything
runs with one BLAS thread (``--default-threads`` keeps the library's own setting): on small shared machines
a second BLAS thread does not speed up these ``n x p^2`` products and slows everything down badly when the
cores are busy. The data are
invented (the fictional city of Norhaven): smooth seasonal counts with mean about 30, over-dispersed by
a gamma multiplier, and a log-normal particulate series with 3% missing days.
"""

from __future__ import annotations

import argparse
import os
import time
import warnings

import numpy as np
import patsy
import statsmodels.api as sm
from scipy.linalg import cho_factor, cho_solve
from threadpoolctl import threadpool_info

from airhealth._threads import single_threaded_blas
from airhealth.model.engine.grid import fit_confounders
from airhealth.model.engine.grid_inference import fit_exposure_only
from airhealth.model.engine.irls import fit_glm

N_DAYS = 5113  # 14 years


def norhaven_design(seed: int = 2024):
    """Confounder block (118 columns), exposure series with gaps, and daily counts."""
    rng = np.random.default_rng(seed)
    t = np.arange(N_DAYS, dtype=float)
    season = np.sin(2 * np.pi * t / 365.25)
    temp = 11 + 8 * season + rng.normal(0, 3, N_DAYS)
    temp13 = np.convolve(temp, np.ones(3) / 3, mode="full")[:N_DAYS]
    data = {"t": t, "temp": temp, "temp13": temp13, "dow": (t % 7).astype(int)}
    Z = np.asarray(patsy.dmatrix("bs(t, df=98) + bs(temp, df=7) + bs(temp13, df=6) + C(dow)", data), dtype=float)
    log_pm = np.empty(N_DAYS)
    log_pm[0] = 3.2
    for i in range(1, N_DAYS):
        log_pm[i] = 3.2 + 0.7 * (log_pm[i - 1] - 3.2) + rng.normal(0, 0.3)
    pm = np.exp(log_pm - 0.5 * season * 0.3)
    eta = np.log(30) + 0.15 * season + 0.004 * (temp - 15) ** 2 / 4 + 0.0005 * pm
    y = rng.poisson(np.exp(eta) * rng.gamma(10, 0.1, N_DAYS)).astype(float)
    pm[rng.random(N_DAYS) < 0.03] = np.nan
    return Z, pm, y


def lag(x: np.ndarray, k: int) -> np.ndarray:
    out = np.full_like(x, np.nan)
    out[k:] = x[: x.size - k]
    return out


def lag_structures(pm: np.ndarray) -> list[tuple[str, np.ndarray]]:
    """Twelve exposure blocks: single lags 0-5, means over lags 0-1/0-2/0-3, free lags 0-3 and 0-5,
    and a quadratic polynomial distributed lag over 0-5."""
    lags = np.column_stack([lag(pm, k) for k in range(6)])
    out = [(f"lag {k}", lags[:, [k]]) for k in range(6)]
    out += [(f"mean 0-{m}", lags[:, : m + 1].mean(axis=1, keepdims=True)) for m in (1, 2, 3)]
    out += [("free 0-3", lags[:, :4]), ("free 0-5", lags)]
    basis = np.vander(np.arange(6.0), 3, increasing=True)
    out.append(("poly 0-5", lags @ basis))
    return out


def plain_irls(X, y, tol=1e-10, max_iter=100):
    """Straightforward Cholesky IRLS (R's glm.fit scheme, no checks); returns coef and (X'WX)^-1."""
    mu = y + 0.1
    eta = np.log(mu)
    dev_old = 2 * np.sum(np.where(y > 0, y * np.log(np.where(y > 0, y, 1) / mu), 0) - (y - mu))
    for _ in range(max_iter):
        z = eta + (y - mu) / mu
        Xw = X * np.sqrt(mu)[:, None]
        cf = cho_factor(Xw.T @ Xw)
        coef = cho_solve(cf, X.T @ (mu * z))
        eta = X @ coef
        mu = np.exp(eta)
        dev = 2 * np.sum(np.where(y > 0, y * np.log(np.where(y > 0, y, 1) / mu), 0) - (y - mu))
        if abs(dev - dev_old) / (abs(dev) + 0.1) <= tol:
            break
        dev_old = dev
    return coef, cho_solve(cf, np.eye(X.shape[1]))


def median_time(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return float(np.median(times))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=7)
    parser.add_argument(
        "--default-threads",
        action="store_true",
        help="keep the BLAS thread count as found (default: one BLAS thread, see airhealth._threads)",
    )
    args = parser.parse_args()
    if args.default_threads:
        run(args)
    else:
        with single_threaded_blas():
            run(args)


def run(args) -> None:
    Z, pm, y = norhaven_design()
    structures = lag_structures(pm)
    X = np.column_stack([Z, np.nan_to_num(lag(pm, 1))])[1:]
    X = X[np.isfinite(lag(pm, 1))[1:]]
    yx = y[1:][np.isfinite(lag(pm, 1))[1:]]
    blas = [
        {k: d.get(k) for k in ("internal_api", "num_threads", "architecture")}
        for d in threadpool_info()
        if d.get("user_api") == "blas"
    ]
    print(f"design: {N_DAYS} days, confounder block {Z.shape[1]} columns; single-fit design {X.shape}")
    print(f"BLAS (threadpoolctl): {blas}; OPENBLAS_CORETYPE={os.environ.get('OPENBLAS_CORETYPE')!r}")

    r = args.repeats
    t_ours = median_time(lambda: fit_glm(X, yx), r)
    t_plain = median_time(lambda: plain_irls(X, yx), r)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t_sm = median_time(lambda: sm.GLM(yx, X, family=sm.families.Poisson()).fit(scale="X2"), max(3, r // 2))

    def grid():
        base = fit_confounders(Z, y)
        return [fit_exposure_only(base, E, np.isfinite(E).all(axis=1)) for _, E in structures]

    def grid_cold():
        out = []
        for _, E in structures:
            rows = np.isfinite(E).all(axis=1)
            out.append(fit_glm(np.hstack([Z, E])[rows], y[rows]))
        return out

    def grid_sm():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for _, E in structures:
                rows = np.isfinite(E).all(axis=1)
                sm.GLM(y[rows], np.hstack([Z, E])[rows], family=sm.families.Poisson()).fit(scale="X2")

    t_grid = median_time(grid, r)
    t_cold = median_time(grid_cold, max(3, r // 2))
    t_gsm = median_time(grid_sm, 3)
    fast, cold = grid(), grid_cold()
    worst = max(
        np.max(np.abs(a.coef - b.coef[-a.coef.size :]) / b.std_err[-a.coef.size :])
        for a, b in zip(fast, cold, strict=True)
    )
    print(
        f"single fit  fit_glm {t_ours * 1e3:8.1f} ms | plain IRLS {t_plain * 1e3:8.1f} ms | "
        f"statsmodels {t_sm * 1e3:8.1f} ms"
    )
    print(f"  statsmodels / fit_glm = {t_sm / t_ours:6.1f}x   fit_glm / plain IRLS = {t_ours / t_plain:5.2f}")
    print(
        f"12-structure grid  fit_exposure_only {t_grid * 1e3:8.1f} ms | 12 cold fit_glm {t_cold * 1e3:8.1f} ms"
        f" | 12 statsmodels {t_gsm * 1e3:8.1f} ms"
    )
    print(f"  statsmodels / grid = {t_gsm / t_grid:6.1f}x   cold fit_glm / grid = {t_cold / t_grid:5.2f}x")
    print(f"  largest grid-vs-cold coefficient difference: {worst:.2e} standard errors")  # fmt: skip


if __name__ == "__main__":
    main()
