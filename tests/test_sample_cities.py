"""The committed multi-city sample: reproduced by its script, and analysed end to end with the broken city
reported and the known mean effect recovered."""

from __future__ import annotations

import runpy
from pathlib import Path

import pandas as pd
import pytest

import airhealth

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"


def test_the_script_reproduces_the_committed_csv_files(tmp_path):
    script = runpy.run_path(str(SAMPLE / "generate_cities.py"))
    script["write"](tmp_path)
    committed = sorted(p.name for p in (SAMPLE / "cities").glob("*.csv"))
    assert committed == sorted(p.name for p in (tmp_path / "cities").glob("*.csv"))
    assert len(committed) == 20
    for name in committed:
        assert (tmp_path / "cities" / name).read_bytes() == (SAMPLE / "cities" / name).read_bytes(), name
    assert (tmp_path / "cities_truth.csv").read_bytes() == (SAMPLE / "cities_truth.csv").read_bytes()
    pd.testing.assert_frame_equal(
        pd.read_parquet(tmp_path / "cities_long.parquet"), pd.read_parquet(SAMPLE / "cities_long.parquet")
    )


def test_the_sample_is_analysed_with_the_broken_city_reported():
    truth = pd.read_csv(SAMPLE / "cities_truth.csv")
    broken = truth.loc[truth.broken, "city"].item()
    with pytest.warns(airhealth.DataWarning, match=rf"1 of 20 cities could not be fitted \({broken}\)"):
        table = airhealth.fit_cities(SAMPLE / "cities", "serial", show_progress=False, outcome="deaths",
                                     exposure="pm25", temperature="temperature")  # fmt: skip
    assert "kelvins" in table.set_index("city").loc[broken, "error"]
    with pytest.warns(airhealth.DataWarning, match=f"left out of the pooling: {broken}"):
        pooled = airhealth.pool(table)
    assert pooled.k == 19
    # the 19 cities' true effects average 0.00066 (their population mean is 0.0008): the pooled mean must be
    # within 2 of its SEs of what the cities' effects were (fixed data, so this holds or shows a bias)
    realized = truth.loc[~truth.broken, "true_coef"].mean()
    assert abs(pooled.coef - realized) < 2 * pooled.se
