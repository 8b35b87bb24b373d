"""The fitting path picks its BLAS thread count itself and gives the caller's setting back.

Reference: the policy's own statement (:func:`airhealth._threads.fitting_blas_threads`: one BLAS thread for
designs up to ``ONE_THREAD_MAX_WORK`` multiply-adds, the caller's setting above) and threadpoolctl's report
of each loaded BLAS library's thread count, read from inside the engine while a fit runs. The caller's
setting is forced to 2 threads first (threadpoolctl), so a fit that did not limit or did not restore would
be seen here even on a one-core machine. No timings (they belong in benchmarks/).
"""

from __future__ import annotations

import threading
import warnings

import pytest
from threadpoolctl import threadpool_limits

import airhealth
from airhealth import _threads
from airhealth._threads import blas_threads, fitting_blas_threads
from airhealth.model.engine import irls as engine
from airhealth.studies.compare import compare
from airhealth.studies.sweep import sweep

OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}


@pytest.fixture(scope="module")
def two_years():
    data = airhealth.load_sample()
    return data[data["date"] < "2012-01-01"].reset_index(drop=True)


@pytest.fixture
def seen_inside(monkeypatch):
    """Record the BLAS thread counts each time the engine's IRLS starts."""
    seen: list[list[int]] = []
    original = engine._irls
    monkeypatch.setattr(engine, "_irls", lambda *a, **k: seen.append(blas_threads()) or original(*a, **k))
    return seen


def fit_quietly(data, **options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return airhealth.fit(data, **{**OPTIONS, **options})


def test_policy_is_one_thread_for_daily_series_and_the_callers_setting_for_huge_designs(monkeypatch):
    assert fitting_blas_threads(5_113, 118) == 1  # 14 years of days, the default model
    assert fitting_blas_threads(50_000, 500) == 1  # the largest design measured
    assert fitting_blas_threads(200_000, 1_000) is None  # not measured: the library's own setting
    monkeypatch.setattr(_threads, "ONE_THREAD_MAX_WORK", 0.0)
    assert fitting_blas_threads(10, 2) is None


def test_a_fit_runs_with_one_blas_thread_and_restores_the_callers_two(two_years, seen_inside):
    with threadpool_limits(limits=2, user_api="blas"):
        before = blas_threads()
        assert set(before) == {2}
        fit_quietly(two_years, lag="0-1")
        assert seen_inside and all(set(counts) == {1} for counts in seen_inside)
        assert blas_threads() == before


def test_a_fit_above_the_policy_size_keeps_the_callers_threads(two_years, seen_inside, monkeypatch):
    monkeypatch.setattr(_threads, "ONE_THREAD_MAX_WORK", 0.0)
    with threadpool_limits(limits=2, user_api="blas"):
        fit_quietly(two_years, lag="0")
        assert seen_inside and all(set(counts) == {2} for counts in seen_inside)
        assert set(blas_threads()) == {2}


def test_a_caller_with_one_thread_is_not_raised(two_years, seen_inside):
    with threadpool_limits(limits=1, user_api="blas"):
        fit_quietly(two_years, lag="0")
        assert all(set(counts) == {1} for counts in seen_inside)
        assert set(blas_threads()) == {1}


def test_compare_and_sweep_run_with_one_thread_and_restore(two_years, seen_inside):
    with threadpool_limits(limits=2, user_api="blas"):
        compare(two_years, ["0", "0-1"], **OPTIONS)
        sweep(two_years, "trend_df_per_year", [4, 6], lag="0", **OPTIONS)
        assert len(seen_inside) >= 3 and all(set(counts) == {1} for counts in seen_inside)
        assert set(blas_threads()) == {2}


def test_fits_in_several_threads_restore_the_setting_when_the_last_one_ends(two_years):
    errors = []

    def work():
        try:
            for _ in range(2):
                fit_quietly(two_years, lag="0")
        except Exception as exc:  # pragma: no cover - reported below
            errors.append(exc)

    with threadpool_limits(limits=2, user_api="blas"):
        threads = [threading.Thread(target=work) for _ in range(3)]
        for t in threads:
            t.start()
        for t in threads:
            t.join(timeout=300)
        assert errors == []
        assert set(blas_threads()) == {2}
    assert _threads._depth == 0


def test_building_the_design_runs_with_one_thread_and_restores(two_years, monkeypatch):
    from airhealth.model import fitting

    seen = []
    original = fitting.build_design
    monkeypatch.setattr(fitting, "build_design", lambda *a, **k: seen.append(blas_threads()) or original(*a, **k))
    with threadpool_limits(limits=2, user_api="blas"):
        fit_quietly(two_years, lag="0")
        assert seen and all(set(counts) == {1} for counts in seen)
        assert set(blas_threads()) == {2}
