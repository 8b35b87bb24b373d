"""Crashed workers: a city whose worker process dies is retried, then reported; the other cities are fitted.

A worker is killed with ``os._exit`` (as a segfault or the out-of-memory killer would end it), which breaks
a local process pool and every city in flight with it; the innocent cities must still get the serial
numbers exactly.
"""

from __future__ import annotations

import os
from concurrent.futures import Executor, Future, ProcessPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd
import pytest

import airhealth
from airhealth.cities.inputs import CitySource
from airhealth.cities.simulate_cities import simulate_cities

MODEL = {"outcome": "deaths", "exposure": "pm25", "temperature": "temperature"}


@dataclass(frozen=True)
class DyingSource(CitySource):
    """Kills the worker process that loads it (never the test process); with a marker, only the first time."""

    frame: pd.DataFrame = field(repr=False)
    parent: int
    marker: Path | None = None

    def load(self, columns):
        if os.getpid() != self.parent and (self.marker is None or not self.marker.exists()):
            if self.marker is not None:
                self.marker.touch()
            os._exit(3)
        return self.frame


@pytest.fixture(scope="module")
def frames():
    return simulate_cities(n_cities=6, years=1.5, seed=9).frames


@pytest.fixture(scope="module")
def serial(frames):
    return airhealth.fit_cities(frames, "serial", show_progress=False, **MODEL).set_index("city")


def run(cities, executor=None, **kw):
    return airhealth.fit_cities(cities, executor, show_progress=False, workers=2, **MODEL, **kw).set_index("city")


def test_a_worker_that_dies_once_is_retried_and_the_city_fitted(frames, serial, tmp_path):
    cities = dict(frames)
    cities["Caddon Ferry"] = DyingSource(frames["Caddon Ferry"], os.getpid(), tmp_path / "died-once")
    table = run(cities)
    assert (tmp_path / "died-once").exists()  # the worker did die
    pd.testing.assert_frame_equal(table, serial)


@pytest.mark.parametrize("retries", [0, 1])
def test_a_city_that_kills_its_worker_every_time_is_reported_and_the_others_fitted(frames, serial, retries):
    cities = dict(frames)
    cities["Dunmere"] = DyingSource(frames["Dunmere"], os.getpid())
    with pytest.warns(airhealth.DataWarning, match=r"1 of 6 cities could not be fitted \(Dunmere\)"):
        table = run(cities, retries=retries)
    attempts = retries + 1
    assert table.loc["Dunmere", "error"].startswith("the worker fitting this city stopped (BrokenProcessPool: ")
    assert (
        f"on {attempts} attempt{'s' if attempts > 1 else ''}; the city was not fitted" in table.loc["Dunmere", "error"]
    )
    others = table.drop(index="Dunmere")
    pd.testing.assert_frame_equal(others, serial.drop(index="Dunmere"))


def test_a_callers_pool_that_breaks_is_reported_not_raised(frames):
    cities = dict(frames)
    cities["Alderwick"] = DyingSource(frames["Alderwick"], os.getpid())
    with ProcessPoolExecutor(2) as pool, pytest.warns(airhealth.DataWarning, match="could not be fitted"):
        table = run(cities, pool)
    assert "BrokenProcessPool" in table.loc["Alderwick", "error"]
    assert list(table.index) == list(frames)  # every city has its row, fitted or not


class KilledWorker(Exception):
    """Stands in for dask's exception of a task whose worker died (same name, raised from the future)."""


class FlakyExecutor(Executor):
    """Runs jobs inline; the futures of the named cities fail ``failures`` times as a killed dask worker would."""

    def __init__(self, failing: str, failures: int) -> None:
        self.failing, self.left = failing, failures

    def submit(self, fn, /, *args, **kwargs):
        future: Future = Future()
        if args[0].name == self.failing and self.left > 0:
            self.left -= 1
            future.set_exception(KilledWorker(f"attempted to run task on 3 workers, all died: {self.failing}"))
        else:
            future.set_result(fn(*args, **kwargs))
        return future


def test_a_killed_worker_on_a_callers_executor_is_retried_then_reported(frames, serial):
    table = run(frames, FlakyExecutor("Fallowby", failures=1))
    pd.testing.assert_frame_equal(table, serial)  # one failure, one retry: fitted
    with pytest.warns(airhealth.DataWarning, match=r"could not be fitted \(Fallowby\)"):
        table = run(frames, FlakyExecutor("Fallowby", failures=2))
    assert table.loc["Fallowby", "error"].startswith(
        "the worker fitting this city stopped (KilledWorker: attempted to run task on 3 workers, all died: "
        "Fallowby) on 2 attempts"
    )
    pd.testing.assert_frame_equal(table.drop(index="Fallowby"), serial.drop(index="Fallowby"))
