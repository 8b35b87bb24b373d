"""The time-stratified case-crossover on 14 years of daily data: airhealth (stratum intercepts eliminated)
against the indicator-column GLM fitted with statsmodels, in the same run.

    python benchmarks/bench_case_crossover.py [--repeats 5] [--reference-repeats 1]

Data: the Norhaven sample (5,113 days, 2010-2023), deaths_all on pm25 at lag 0-1 with the temperature
splines (same day and mean of lags 1-3, 6 df each), quasi-Poisson; 4,946 days used in 1,176 strata of year ×
month × day of week. The reference is ``sm.GLM(y, [X, stratum indicators], Poisson).fit(scale="X2",
tol=1e-10)`` on the prebuilt design (4,946 × 1,189), the conditional Poisson model fitted the slow way
(Armstrong, Gasparrini & Tobias 2014). Figures:

* ``airhealth.fit from data``: ``airhealth.fit(..., design="case-crossover")`` from the data frame
  (validation, strata, design, fit, result);
* ``engine alone``: ``fit_glm(X, y, strata=codes)`` on the prebuilt design;
* ``statsmodels``: the indicator-column GLM on the prebuilt design (its construction not counted).

Each is timed with the BLAS library's own thread count (as a user calls it) and with one BLAS thread for the
whole block (threadpoolctl); ratios are against statsmodels in the same thread setting. Best of the repeats.
The estimates of the two are checked to agree (1e-6 relative) before the figures are printed.
"""

from __future__ import annotations

import argparse
import contextlib
import time

import numpy as np
import statsmodels.api as sm

import airhealth
from airhealth._threads import single_threaded_blas
from airhealth.model.design import build_design, model_frame
from airhealth.model.engine.irls import fit_glm
from airhealth.model.spec import ModelSpec

OPTIONS = dict(outcome="deaths_all", exposure="pm25", lag="0-1", temperature="temperature", design="case-crossover")


def best_seconds(call, repeats: int) -> float:
    """Best wall time of ``repeats`` calls (a 0.2 s pause before each, so none pays for spinning threads)."""
    times = []
    for _ in range(repeats):
        time.sleep(0.2)
        start = time.perf_counter()
        call()
        times.append(time.perf_counter() - start)
    return min(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--reference-repeats", type=int, default=1)
    args = parser.parse_args()
    data = airhealth.load_sample()
    spec = ModelSpec.from_options(**OPTIONS)
    design = build_design(model_frame(data, spec), spec)
    codes = design.strata.codes
    indicators = np.zeros((codes.size, design.strata.n_strata))
    indicators[np.arange(codes.size), codes] = 1.0
    full = np.hstack([design.matrix, indicators])
    p = design.matrix.shape[1]

    def reference():
        return sm.GLM(design.response, full, family=sm.families.Poisson()).fit(scale="X2", tol=1e-10)

    n_days, n_strata = design.matrix.shape[0], design.strata.n_strata
    print(f"{n_days} days, {p} columns, {n_strata} strata; statsmodels design {full.shape}", flush=True)
    fitted: list = []
    for label, context in (("default threads", contextlib.nullcontext), ("one BLAS thread", single_threaded_blas)):
        with context():
            t_fit = best_seconds(lambda: airhealth.fit(data, **OPTIONS), args.repeats)
            t_engine = best_seconds(
                lambda: fit_glm(design.matrix, design.response, family="quasipoisson", strata=codes), args.repeats
            )
            t_ref = best_seconds(lambda: fitted.append(reference()), args.reference_repeats)
        ours, ref = airhealth.fit(data, **OPTIONS), fitted[-1]  # the two agree before any figure is printed
        assert np.allclose(ours.coef.to_numpy(), ref.params[:p], rtol=1e-6, atol=1e-9)
        assert np.allclose(ours.std_err.to_numpy(), ref.bse[:p], rtol=1e-6)
        print(f"[{label}] exposure coefficient {ours.exposure_coef:.10g} (statsmodels {ref.params[p - 1]:.10g})")
        for name, seconds in (
            ("statsmodels indicator-column GLM", t_ref),
            ("airhealth.fit from data", t_fit),
            ("engine alone (fit_glm, strata)", t_engine),
        ):
            print(f"  {name:34s} {seconds * 1e3:10.1f} ms   statsmodels / this = {t_ref / seconds:7.1f}x", flush=True)


if __name__ == "__main__":
    main()
