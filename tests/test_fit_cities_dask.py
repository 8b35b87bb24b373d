"""The first stage on dask.distributed: ``client.get_executor()`` gives the serial estimates exactly.

Skipped (with the reason) when dask.distributed is not installed: it is the optional ``[dask]`` extra.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth import SpecificationError
from airhealth.cities.executors import connect_dask
from airhealth.cities.inputs import CitySource
from airhealth.cities.simulate_cities import simulate_cities

distributed = pytest.importorskip(
    "distributed", reason="dask.distributed is not installed (the optional [dask] extra): dask executor not tested"
)

MODEL = {"outcome": "deaths", "exposure": "pm25", "temperature": "temperature"}


@pytest.fixture(scope="module")
def client():
    cluster = distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None, silence_logs=40
    )
    client = distributed.Client(cluster, set_as_default=False)
    try:
        yield client
    finally:
        client.close()
        cluster.close()


def test_a_dask_local_cluster_gives_the_serial_estimates_and_reports_the_broken_city(client):
    scenario = simulate_cities(n_cities=5, years=1.5, seed=21, broken=True)
    with pytest.warns(airhealth.DataWarning, match="could not be fitted"):
        serial = airhealth.fit_cities(scenario.frames, "serial", show_progress=False, lag="dl0-2", **MODEL)
    with pytest.warns(airhealth.DataWarning, match="could not be fitted"):
        on_dask = airhealth.fit_cities(
            scenario.frames, client.get_executor(), show_progress=False, lag="dl0-2", **MODEL
        )
    # exact: the same fit in another process (values compared bit for bit, arrays included)
    pd.testing.assert_frame_equal(
        on_dask.drop(columns=["lag_coefs", "lag_cov"]), serial.drop(columns=["lag_coefs", "lag_cov"])
    )
    for column in ("lag_coefs", "lag_cov"):
        for a, b in zip(on_dask[column], serial[column], strict=True):
            assert np.array_equal(a, b, equal_nan=True)
    assert "kelvins" in on_dask.set_index("city").loc[scenario.broken_city, "error"]


@pytest.mark.slow
def test_dask_workers_read_their_own_parquet_rows(client, tmp_path):
    scenario = simulate_cities(n_cities=3, years=1.5, seed=22)
    scenario.long().to_parquet(tmp_path / "cities.parquet")
    serial = airhealth.fit_cities(scenario.frames, "serial", show_progress=False, **MODEL)
    on_dask = airhealth.fit_cities(
        tmp_path / "cities.parquet", client.get_executor(), city="city", show_progress=False, **MODEL
    )
    pd.testing.assert_frame_equal(on_dask.set_index("city").loc[serial.city].reset_index(), serial)


def test_an_unreachable_scheduler_is_a_clear_error_naming_the_address():
    with pytest.raises(SpecificationError, match=r"the dask scheduler at 'tcp://127.0.0.1:9' could not be reached"):
        connect_dask("tcp://127.0.0.1:9", timeout=1)


@dataclass(frozen=True)
class DyingSource(CitySource):
    """Kills the dask worker process that loads it (pickled by value, so workers need not import this file)."""

    frame: pd.DataFrame = field(repr=False)
    parent: int

    def load(self, columns):
        if os.getpid() != self.parent:
            os._exit(3)
        return self.frame


@pytest.mark.slow
def test_a_city_that_kills_its_dask_worker_is_retried_then_reported():
    import sys

    import cloudpickle
    import dask

    scenario = simulate_cities(n_cities=3, years=1.5, seed=23)
    cities = dict(scenario.frames)
    cities["Brackenmoor"] = DyingSource(scenario.frames["Brackenmoor"], os.getpid())
    cloudpickle.register_pickle_by_value(sys.modules[__name__])
    try:
        with dask.config.set({"distributed.scheduler.allowed-failures": 0}):
            cluster = distributed.LocalCluster(
                n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None, silence_logs=50
            )
            client = distributed.Client(cluster, set_as_default=False)
            try:
                with pytest.warns(airhealth.DataWarning, match=r"could not be fitted \(Brackenmoor\)"):
                    table = airhealth.fit_cities(cities, client.get_executor(), show_progress=False, **MODEL)
            finally:
                client.close()
                cluster.close()
    finally:
        cloudpickle.unregister_pickle_by_value(sys.modules[__name__])
    error = table.set_index("city").loc["Brackenmoor", "error"]
    assert error.startswith("the worker fitting this city stopped (KilledWorker: ") and "on 2 attempts" in error
    serial = airhealth.fit_cities(scenario.frames, "serial", show_progress=False, **MODEL).set_index("city")
    others = table.set_index("city").drop(index="Brackenmoor")
    pd.testing.assert_frame_equal(others, serial.drop(index="Brackenmoor"))
