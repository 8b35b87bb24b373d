"""Tests of the shared-work lag-grid path (exposure block only) and of the BLAS thread limits.

The reference for :func:`~airhealth.model.engine.grid_inference.fit_exposure_only` is the plain path, ``fit_glm``
on the stacked design restricted to the usable rows (itself checked against statsmodels in test_engine.py).
Both converge to machine precision, so coefficients, standard errors and dispersion must agree to 1e-9
relative (coefficients near zero on the standard-error scale); a chord iteration stopped early or a
covariance at the wrong point would differ by > 1e-7.
"""

from __future__ import annotations

import numpy as np
import patsy
import pytest

from airhealth._threads import blas_threads, single_threaded_blas, worker_initializer
from airhealth.errors import FitError
from airhealth.model.engine import grid as grid_engine
from airhealth.model.engine import grid_inference
from airhealth.model.engine.grid import fit_confounders
from airhealth.model.engine.irls import fit_glm

RTOL = 1e-9
N = 1500


def lag(x, k):
    out = np.full_like(x, np.nan)
    out[k:] = x[: x.size - k]
    return out


@pytest.fixture(scope="module")
def data():
    """Norhaven-like daily series: confounder block, particulate series with 4% missing days, counts."""
    rng = np.random.default_rng(21)
    t = np.arange(N, dtype=float)
    season = np.sin(2 * np.pi * t / 365.25)
    temp = 11 + 8 * season + rng.normal(0, 3, N)
    Z = np.asarray(
        patsy.dmatrix("bs(t, df=24) + bs(temp, df=5) + C(dow)", {"t": t, "temp": temp, "dow": t % 7}),
        dtype=float,
    )
    pm = np.exp(rng.normal(3.2, 0.4, N))
    eta = np.log(30) + 0.15 * season + 0.004 * (temp - 15) ** 2 / 4 + 0.0008 * pm
    y = rng.poisson(np.exp(eta) * rng.gamma(8, 1 / 8, N)).astype(float)
    pm[rng.random(N) < 0.04] = np.nan
    offset = np.log(rng.uniform(0.9, 1.1, N))
    return Z, pm, y, offset


def exposures(pm):
    lags = np.column_stack([lag(pm, k) for k in range(4)])
    return {
        "lag0": lags[:, [0]],
        "lag2": lags[:, [2]],
        "mean0-3": lags.mean(axis=1, keepdims=True),
        "free0-3": lags,
    }


def masks(E):
    rng = np.random.default_rng(5)
    usable = np.isfinite(E).all(axis=1)
    block = usable.copy()
    block[400:460] = False  # a contiguous two months without data
    scattered = usable & (rng.random(usable.size) > 0.1)
    return {"usable": usable, "block": block, "scattered": scattered}


def test_many_excluded_rows_use_the_direct_gram(data, monkeypatch):
    Z, pm, y, _ = data
    base = fit_confounders(Z, y)
    E = exposures(pm)["lag0"]
    rows = np.isfinite(E[:, 0]) & (np.arange(N) % 2 == 0)  # half the days: no downdate
    monkeypatch.setattr(grid_inference, "plain_fit", None)  # calling it would fail
    plain = fit_glm(np.hstack([Z, np.nan_to_num(E)])[rows], y[rows])
    assert_same_exposure_block(grid_inference.fit_exposure_only(base, E, rows), plain, 1)


def test_missing_exposure_on_a_usable_row_is_an_error(data):
    Z, pm, y, _ = data
    base = fit_confounders(Z, y)
    E = lag(pm, 1)
    rows = np.arange(N) > 0  # row 0 (no previous day) is excluded, the later gaps are not
    bad_row = int(np.flatnonzero(np.isnan(E))[1])
    with pytest.raises(FitError, match=rf"rows marked usable\) has a non-finite value .*at row {bad_row},"):
        grid_inference.fit_exposure_only(base, E, rows)


def test_bad_rows_mask_is_an_error(data):
    Z, pm, y, _ = data
    base = fit_confounders(Z, y)
    with pytest.raises(FitError, match="boolean mask"):
        grid_inference.fit_exposure_only(base, np.nan_to_num(pm), np.ones(N))


def test_a_given_fallback_replaces_the_plain_path(data):
    Z, pm, y, _ = data
    base = fit_confounders(Z, y, family="negbin")  # estimated theta: the shared work does not apply
    E = exposures(pm)["lag2"]
    rows = masks(E)["usable"]
    reference = fit_glm(np.hstack([Z, np.nan_to_num(E)])[rows], y[rows], family="negbin")
    calls = []
    fit = grid_inference.fit_exposure_only(base, E, rows, fallback=lambda: calls.append(1) or reference)
    assert calls == [1] and fit.coef[0] == reference.coef[-1] and fit.theta == reference.theta


def test_single_threaded_blas_limits_blas_to_one_thread():
    before = blas_threads()
    assert before, "numpy's BLAS should be visible to threadpoolctl"
    with single_threaded_blas():
        assert set(blas_threads()) == {1}
    assert blas_threads() == before


def test_worker_initializer_in_a_process_pool():
    from concurrent.futures import ProcessPoolExecutor

    with ProcessPoolExecutor(max_workers=1, initializer=worker_initializer) as pool:
        counts = pool.submit(blas_threads).result(timeout=60)
    assert counts and set(counts) == {1}


# ------------------------------------------------------------------------- exposure block only
def assert_same_exposure_block(fast, plain, k):
    """ExposureFit against the exposure block of a full fit (tolerances: module docstring)."""
    theta, se = plain.coef[-k:], plain.std_err[-k:]
    np.testing.assert_array_less(np.abs(fast.coef - theta), RTOL * (np.abs(theta) + se))
    np.testing.assert_allclose(fast.std_err, se, rtol=RTOL)
    sd = np.sqrt(np.diag(plain.cov[-k:, -k:]))
    assert np.abs((fast.cov - plain.cov[-k:, -k:]) / np.outer(sd, sd)).max() < RTOL
    for name in ("dispersion", "deviance", "loglik", "pearson_chi2", "qaic"):
        assert getattr(fast, name) == pytest.approx(getattr(plain, name), rel=RTOL), name
    assert fast.n_obs == plain.n_obs and fast.n_params == plain.n_params and fast.df_resid == plain.df_resid


@pytest.mark.parametrize("family", ["quasipoisson", "poisson"])
def test_exposure_only_equals_plain_fit(data, family, monkeypatch):
    Z, pm, y, offset = data
    base = grid_engine.fit_confounders(Z, y, family=family, offset=offset)

    def no_fallback(*args, **kwargs):
        raise AssertionError("the exposure-only path fell back to the plain fit")

    monkeypatch.setattr(grid_inference, "plain_fit", no_fallback)
    monkeypatch.setattr(grid_inference, "_exact_projection", no_fallback)  # refinement must converge
    checked = 0
    for E in exposures(pm).values():
        for rows in masks(E).values():
            fast = grid_inference.fit_exposure_only(base, E, rows)
            plain = fit_glm(np.hstack([Z, np.nan_to_num(E)])[rows], y[rows], family=family, offset=offset[rows])
            assert_same_exposure_block(fast, plain, E.shape[1])
            assert fast.converged and not fast.exact_product and fast.family == family
            checked += 1
    assert checked == 12


def test_exposure_only_with_weights_and_fixed_theta(data):
    Z, pm, y, _ = data
    w = np.random.default_rng(8).integers(1, 3, N).astype(float)
    E = exposures(pm)["free0-3"]
    rows = masks(E)["block"]
    base = fit_confounders(Z, y, weights=w)
    plain = fit_glm(np.hstack([Z, np.nan_to_num(E)])[rows], y[rows], weights=w[rows])
    assert_same_exposure_block(grid_inference.fit_exposure_only(base, E, rows), plain, 4)
    base_nb = fit_confounders(Z, y, family="negbin", theta=10.0)
    plain_nb = fit_glm(np.hstack([Z, np.nan_to_num(E)])[rows], y[rows], family="negbin", theta=10.0)
    assert_same_exposure_block(grid_inference.fit_exposure_only(base_nb, E, rows), plain_nb, 4)


def test_exposure_only_stalled_refinement_uses_the_exact_product(data, monkeypatch):
    Z, pm, y, _ = data
    base = fit_confounders(Z, y)
    E = exposures(pm)["mean0-3"]
    rows = masks(E)["usable"]
    monkeypatch.setattr(grid_inference, "REFINE_RTOL", 0.0)  # never reached: the refinement must stall
    monkeypatch.setattr(grid_inference, "_refined", lambda *a: False)
    monkeypatch.setattr(grid_inference, "plain_fit", None)  # the fixed-Hessian path itself must take the exact product
    fast = grid_inference.fit_exposure_only(base, E, rows)
    assert fast.exact_product
    plain = fit_glm(np.hstack([Z, np.nan_to_num(E)])[rows], y[rows])
    assert_same_exposure_block(fast, plain, 1)


def test_exposure_only_fallbacks_keep_the_answer_and_the_errors(data):
    Z, pm, y, _ = data
    names = [f"z{j}" for j in range(Z.shape[1])]
    base = fit_confounders(Z, y, column_names=names)
    E = exposures(pm)["lag2"]
    rows = masks(E)["usable"]
    one_step = grid_inference.fit_exposure_only(base, E, rows, max_iter=1)  # cannot converge: plain path
    plain = fit_glm(np.hstack([Z, np.nan_to_num(E)])[rows], y[rows])
    assert_same_exposure_block(one_step, plain, 1)
    assert one_step.exact_product
    with pytest.raises(FitError, match=r"rank-deficient") as info:
        grid_inference.fit_exposure_only(base, (Z[:, 1] + 2 * Z[:, 2])[:, None], column_names=["pm10"])
    assert "'pm10'" in str(info.value)
    base_nb = fit_confounders(Z, y, family="negbin")  # estimated theta: always the plain path
    nb = grid_inference.fit_exposure_only(base_nb, E, rows)
    ref = fit_glm(np.hstack([Z, np.nan_to_num(E)])[rows], y[rows], family="negbin")
    assert nb.theta == pytest.approx(ref.theta, rel=1e-7) and nb.theta_estimated
    assert nb.coef[0] == pytest.approx(ref.coef[-1], rel=1e-6)


def test_two_pool_workers_report_one_blas_thread_each():
    from concurrent.futures import ProcessPoolExecutor

    with ProcessPoolExecutor(max_workers=2, initializer=worker_initializer) as pool:
        futures = [pool.submit(_pid_and_threads) for _ in range(4)]
        answers = [f.result(timeout=120) for f in futures]
    assert len(answers) == 4 and all(counts and set(counts) == {1} for _, counts in answers)


def _pid_and_threads():
    import os
    import time

    time.sleep(0.2)  # keep the worker busy so the other worker takes the next task
    return os.getpid(), blas_threads()


def test_a_confounder_column_without_support_on_the_usable_rows_leaves_the_structure_to_the_full_fit(data):
    """Excluded rows are removed from Z.T W0 Z by a downdate; a column that is zero on every usable row
    then has a diagonal of rounding noise, which must not pass for information (engine's rank test)."""
    Z, pm, y, _ = data
    base = fit_confounders(Z, y)
    E = exposures(pm)["lag0"]
    rows = masks(E)["usable"].copy()
    rows[380:700] = False  # 21% of the days: the downdate path
    unsupported = np.flatnonzero(~np.any(Z[rows] != 0, axis=0))
    assert unsupported.size  # a time-spline column lives inside the excluded stretch
    calls = []
    reference = fit_glm(np.hstack([np.delete(Z, unsupported, axis=1), np.nan_to_num(E)])[rows], y[rows])
    fit = grid_inference.fit_exposure_only(base, E, rows, fallback=lambda: calls.append(1) or reference)
    assert calls == [1] and fit.coef[0] == reference.coef[-1]
