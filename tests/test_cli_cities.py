"""``airhealth fit-cities`` and ``airhealth pool``: the files and JSON they write equal the Python functions,
and bad input ends with exit code 2 and a one-line message naming what to fix."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth._io import EXACT_FLOATS
from airhealth.cities.estimates_table import unflatten
from airhealth.cities.simulate_cities import simulate_cities
from airhealth.cli.main import main

MODEL = ["--outcome", "deaths", "--exposure", "pm25", "--temperature", "temperature"]
POOL_KEYS = {"coef", "se", "rr", "rr_low", "rr_high", "tau2", "i2", "q", "q_p", "k", "method", "per"}
POOL_KEYS |= {"prediction_low", "prediction_high"}


@pytest.fixture(scope="module")
def scenario():
    return simulate_cities(n_cities=5, years=2, seed=31, broken=True)


@pytest.fixture(scope="module")
def folder(scenario, tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("cities") / "cities"
    path.mkdir()
    for name, frame in scenario.frames.items():
        frame.to_csv(path / f"{name}.csv", index=False)
    return path


def one_line_error(capsys, command: str) -> str:
    err = capsys.readouterr().err.strip().splitlines()
    assert err[-1].startswith(f"airhealth {command}: error: "), err
    return err[-1]


def test_fit_cities_writes_the_python_estimates(scenario, folder, tmp_path, capsys):
    out = tmp_path / "estimates.csv"
    assert main(["fit-cities", str(folder), *MODEL, "--out", str(out), "--quiet", "--workers", "2"]) == 0
    assert "4 of 5 cities fitted" in capsys.readouterr().out
    written = pd.read_csv(out, keep_default_na=False, na_values=[""], **EXACT_FLOATS)
    with pytest.warns(airhealth.DataWarning):
        python = airhealth.fit_cities(scenario.frames, "serial", show_progress=False, outcome="deaths",
                                      exposure="pm25", temperature="temperature")  # fmt: skip
    written = written.set_index("city").loc[python.city]
    # CSV keeps 17 significant digits (round trip of a double), so equal to the last bit
    np.testing.assert_array_equal(written.coef.to_numpy(), python.coef.to_numpy())
    assert written.loc[scenario.broken_city, "error"] == python.set_index("city").loc[scenario.broken_city, "error"]
    assert json.loads(out.with_suffix(".json").read_text())["lag"] == "0-1"


def test_a_distributed_lag_round_trips_through_the_csv_columns(scenario, tmp_path, capsys):
    long = tmp_path / "long.parquet"
    scenario.long().to_parquet(long)
    out = tmp_path / "dl.csv"
    args = ["fit-cities", str(long), "--city", "city", *MODEL, "--lag", "dl0-3:poly2", "--executor", "serial"]
    assert main([*args, "--out", str(out), "--quiet"]) == 0
    meta = json.loads(out.with_suffix(".json").read_text())
    assert meta["lags"] == [0, 1, 2, 3] and np.array(meta["lag_basis"]).shape == (4, 3)
    back = unflatten(pd.read_csv(out, keep_default_na=False, na_values=[""], **EXACT_FLOATS))
    with pytest.warns(airhealth.DataWarning):
        python = airhealth.fit_cities(scenario.frames, "serial", show_progress=False, lag="dl0-3:poly2",
                                      outcome="deaths", exposure="pm25", temperature="temperature")  # fmt: skip
    back = back.set_index("city").loc[python.city]
    for a, b in zip(back.lag_cov, python.lag_cov, strict=True):
        assert np.array_equal(a, b, equal_nan=True)
    for a, b in zip(back.lag_coefs, python.lag_coefs, strict=True):
        assert np.array_equal(a, b, equal_nan=True)


def test_pool_json_has_the_contract_keys_and_equals_python(folder, tmp_path, capsys):
    out = tmp_path / "estimates.csv"
    main(["fit-cities", str(folder), *MODEL, "--out", str(out), "--quiet", "--executor", "serial"])
    capsys.readouterr()
    assert main(["pool", str(out), "--estimate", "coef", "--se", "se", "--method", "dl", "--json"]) == 0
    captured = capsys.readouterr()
    record = json.loads(captured.out)
    assert POOL_KEYS <= set(record)
    assert "left out of the pooling: Elsworth Vale" in captured.err  # the broken city, named
    with pytest.warns(airhealth.DataWarning):
        python = airhealth.pool(pd.read_csv(out, **EXACT_FLOATS), method="dl")
    assert record["k"] == python.k == 4
    for key in ("coef", "se", "tau2", "i2", "q", "q_p", "rr", "rr_low", "rr_high"):
        assert record[key] == pytest.approx(python.to_dict()[key], rel=1e-15), key  # same numbers, JSON repr
    assert main(["pool", str(out)]) == 0
    assert "pooled RR per 10 units (reml, 4 cities)" in capsys.readouterr().out


def test_bad_input_ends_with_exit_2_and_one_line(folder, tmp_path, capsys):
    one = tmp_path / "one.csv"
    pd.DataFrame({"city": ["A"], "coef": [0.001], "se": [0.0004]}).to_csv(one, index=False)
    assert main(["pool", str(one)]) == 2
    assert "pooling needs at least two usable cities; got 1 (A)" in one_line_error(capsys, "pool")
    zero = tmp_path / "zero.csv"
    pd.DataFrame({"city": ["A", "B"], "coef": [0.001, 0.002], "se": [0.0004, 0.0]}).to_csv(zero, index=False)
    assert main(["pool", str(zero)]) == 2
    assert "standard error column 'se' must be positive and finite; it is not for B (0.0)" in one_line_error(
        capsys, "pool"
    )
    long = tmp_path / "long.csv"
    pd.concat([pd.read_csv(p) for p in sorted(folder.glob("*.csv"))]).to_csv(long, index=False)
    assert main(["fit-cities", str(long), "--city", "town", *MODEL, "--out", str(tmp_path / "e.csv")]) == 2
    assert "the city column 'town' is not in the file long.csv; its columns are ['date'" in one_line_error(
        capsys, "fit-cities"
    )


def test_an_unreachable_dask_scheduler_ends_with_exit_2_naming_it(folder, tmp_path, capsys):
    pytest.importorskip("distributed", reason="dask.distributed is not installed (the optional [dask] extra)")
    address = "tcp://127.0.0.1:9"
    args = ["fit-cities", str(folder), *MODEL, "--out", str(tmp_path / "e.csv"), "--executor", "dask"]
    assert main([*args, "--scheduler", address, "--connect-timeout", "1"]) == 2
    assert f"the dask scheduler at '{address}' could not be reached" in one_line_error(capsys, "fit-cities")
    assert not (tmp_path / "e.csv").exists()  # nothing written, nothing overwritten


def test_pool_with_a_moderator_equals_python_meta_regression(tmp_path, capsys):
    rng = np.random.default_rng(4)
    table = pd.DataFrame(
        {
            "town": [f"T{i}" for i in range(12)],
            "coef": rng.normal(0.0008, 0.0004, 12),
            "se": rng.uniform(2e-4, 6e-4, 12),
            "mean_temp": rng.uniform(5, 20, 12),
        }
    )
    path = tmp_path / "est.csv"
    table.to_csv(path, index=False)
    assert main(["pool", str(path), "--city", "town", "--moderator", "mean_temp", "--json"]) == 0
    record = json.loads(capsys.readouterr().out)
    python = airhealth.pool(table.rename(columns={"town": "city"}), moderators=["mean_temp"]).to_dict()
    for key in ("qm", "qm_p", "tau2", "q"):
        assert record[key] == pytest.approx(python[key], rel=1e-15), key  # same numbers through JSON
    assert record["moderators"] == ["mean_temp"]


def test_fit_cities_where_no_city_fits_exits_2_with_the_first_message(folder, tmp_path, capsys):
    # before, exit 0 with "0 of 5 cities fitted": a script could not tell that nothing was estimated
    out = tmp_path / "none.csv"
    argv = ["fit-cities", str(folder), "--outcome", "deaths", "--exposure", "no_such_column", "--quiet"]
    assert main([*argv, "--out", str(out)]) == 2
    line = one_line_error(capsys, "fit-cities")
    assert "none of the 5 cities could be fitted; first, " in line
    assert "column 'no_such_column' does not exist in data" in line
    assert line.endswith(f"Every city's message is in the 'error' column of {out}.")
    assert (pd.read_csv(out, keep_default_na=False)["error"] != "").all()  # the table is still written
