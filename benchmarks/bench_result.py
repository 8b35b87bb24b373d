"""What read-only results cost: building a FitResult (its own copies of coef, cov, dropped, fitted and
observed) and the copies handed out on each access, against the fit itself.

    python benchmarks/bench_result.py [--repeats 300]

Data: the Norhaven sample with the default model, lag 0-1 (4,946 days × 118 columns). The goal is under
1 ms per fit for the construction (airhealth.model.result.FitResult).
"""

from __future__ import annotations

import argparse
import timeit

import airhealth
from airhealth.model.design import build_design, model_frame
from airhealth.model.fitting import fit_design, result_from_fit
from airhealth.model.result import FitResult
from airhealth.model.spec import ModelSpec


def per_call_ms(call, repeats: int) -> float:
    """Best of five rounds of ``repeats`` calls, per call in milliseconds."""
    return min(timeit.repeat(call, number=repeats, repeat=5)) / repeats * 1e3


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=300)
    repeats = parser.parse_args().repeats
    data = airhealth.load_sample()
    spec = ModelSpec("deaths_all", "pm25", lag="0-1", temperature="temperature")
    design = build_design(model_frame(data, spec), spec)
    glm = fit_design(design, spec)
    result = result_from_fit(design, spec, glm)
    fields = {
        "spec": result.spec, "coef": result.coef, "cov": result.cov, "dispersion": result.dispersion,
        "deviance": result.deviance, "loglik": result.loglik, "qaic": result.qaic, "df_resid": result.df_resid,
        "n_days": result.n_days, "dropped": result.dropped, "fitted": result.fitted, "observed": result.observed,
        "exposure_columns": result.exposure_columns, "exposure_iqr": result.exposure_iqr,
        "converged": result.converged, "n_iter": result.n_iter, "bases": dict(result.bases),
    }  # fmt: skip
    rows = {
        "fit_design (the engine fit)": per_call_ms(lambda: fit_design(design, spec), max(repeats // 30, 3)),
        "result_from_fit (packaging, all of it)": per_call_ms(lambda: result_from_fit(design, spec, glm), repeats),
        "FitResult(...) (its own copies)": per_call_ms(lambda: FitResult(**fields), repeats),
        "result.coef (a copy)": per_call_ms(lambda: result.coef, repeats),
        "result.cov (a copy)": per_call_ms(lambda: result.cov, repeats),
        "result.fitted (a copy)": per_call_ms(lambda: result.fitted, repeats),
        "result.effect()": per_call_ms(result.effect, repeats),
    }
    print(f"{len(result.fitted)} days x {len(result.coef)} columns")
    for name, ms in rows.items():
        print(f"{name:42s} {ms:8.3f} ms")


if __name__ == "__main__":
    main()
