"""The ``airhealth daily`` command: the output contract, conversions and error messages."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from airhealth.cli.main import main
from airhealth.prep.hourly import daily_statistic
from airhealth.prep.monitors import combine_monitors
from airhealth.prep.units import conversion_factor

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data" / "norhaven_hourly_no2.csv"


@pytest.fixture(scope="module")
def one_monitor(tmp_path_factory) -> Path:
    data = pd.read_csv(SAMPLE)
    path = tmp_path_factory.mktemp("cli") / "nhc.csv"
    data[data["monitor"] == "NHC"].to_csv(path, index=False)
    return path


def test_single_monitor_output_contract(one_monitor, tmp_path, capsys):
    out = tmp_path / "daily.csv"
    code = main(["daily", str(one_monitor), "--time", "time", "--value", "no2_ppb", "--statistic", "mean",
                 "--out", str(out)])  # fmt: skip
    assert code == 0
    # the rule is named by its checked clause (see the project's references), without a "from memory" caveat
    printed = capsys.readouterr().out
    assert "rule: Directive 2008/50/EC, Annex XI A (24-hour values: 75 % of the hourly values = 18 of 24)" in printed
    assert "memory" not in printed
    daily = pd.read_csv(out)
    assert list(daily.columns) == ["date", "no2_ppb", "n_hours"]
    expected = daily_statistic(pd.read_csv(one_monitor), time="time", value="no2_ppb")
    assert daily["date"].tolist() == expected["date"].dt.strftime("%Y-%m-%d").tolist()
    np.testing.assert_allclose(daily["no2_ppb"], expected["no2_ppb"], rtol=1e-12)  # CSV round trip
    assert daily["n_hours"].tolist() == expected["n_hours"].tolist()


def test_max8h_us_with_unit_conversion(one_monitor, tmp_path):
    out = tmp_path / "daily.csv"
    args = ["daily", str(one_monitor), "--time", "time", "--value", "no2_ppb", "--statistic", "max8h",
            "--convention", "us", "--unit-in", "ppb", "--unit-out", "ugm3", "--pollutant", "no2",
            "--temperature", "20", "--out", str(out)]  # fmt: skip
    assert main(args) == 0
    daily = pd.read_csv(out)
    assert list(daily.columns) == ["date", "no2_ugm3", "n_8h_means"]
    ppb = daily_statistic(pd.read_csv(one_monitor), time="time", value="no2_ppb", statistic="max8h", convention="us")
    factor = conversion_factor("no2", "ppb", "ugm3", temperature_c=20.0)
    np.testing.assert_allclose(daily["no2_ugm3"], ppb["no2_ppb"] * factor, rtol=1e-12)


def test_several_monitors_combined(tmp_path):
    out = tmp_path / "city.csv"
    args = ["daily", str(SAMPLE), "--time", "time", "--value", "no2_ppb", "--monitor", "monitor",
            "--statistic", "mean", "--min-monitors", "2", "--out", str(out)]  # fmt: skip
    assert main(args) == 0
    city = pd.read_csv(out, parse_dates=["date"])
    assert list(city.columns) == ["date", "no2_ppb", "n_hours", "n_monitors", "n_hours_per_monitor"]
    per_monitor = daily_statistic(pd.read_csv(SAMPLE), time="time", value="no2_ppb", monitor="monitor")
    expected = combine_monitors(per_monitor, value="no2_ppb", min_monitors=2)
    np.testing.assert_allclose(city["no2_ppb"], expected["no2_ppb"], rtol=1e-12)
    assert (city.loc[city["n_monitors"] < 2, "no2_ppb"].isna()).all()
    assert len(city) == 730  # 2022 and 2023
    # n_hours: valid hours summed over the monitors valid that day; n_hours_per_monitor: their mean
    valid = per_monitor[per_monitor["valid"]]
    hours = valid.groupby("date")["n_hours"].agg(["sum", "count", "mean"]).reindex(city["date"])
    assert city["n_hours"].tolist() == hours["sum"].fillna(0).astype(int).tolist()
    assert city["n_monitors"].tolist() == hours["count"].fillna(0).astype(int).tolist()
    np.testing.assert_allclose(city["n_hours_per_monitor"], hours["mean"].round(2), rtol=0, atol=1e-12)
    assert city["n_hours_per_monitor"].max() <= 24  # a mean over monitors, never a sum


def test_per_monitor_output(tmp_path):
    out = tmp_path / "long.csv"
    args = ["daily", str(SAMPLE), "--time", "time", "--value", "no2_ppb", "--monitor", "monitor",
            "--statistic", "max1h", "--per-monitor", "--out", str(out)]  # fmt: skip
    assert main(args) == 0
    assert list(pd.read_csv(out).columns) == ["monitor", "date", "no2_ppb", "n_hours"]


def write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "hourly.csv"
    path.write_text(text)
    return path


def test_errors_name_csv_lines(tmp_path, capsys):
    bad = write(tmp_path, "time,v\n2022-06-01 00:00,1\n2022-06-01 01:00,oops\n")
    out = tmp_path / "x.csv"
    assert main(["daily", str(bad), "--time", "time", "--value", "v", "--statistic", "mean", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "rows 3 (e.g. 'oops')" in err and not out.exists()
    dup = write(tmp_path, "time,v\n2022-06-01 00:00,1\n2022-06-01 00:00,2\n")
    assert main(["daily", str(dup), "--time", "time", "--value", "v", "--statistic", "mean", "--out", str(out)]) == 2
    assert "row 2: monitor 'all' hour 2022-06-01 00:00; row 3" in capsys.readouterr().err


def test_mixed_unit_column_refused(tmp_path, capsys):
    mixed = write(tmp_path, "time,v,unit\n2022-06-01 00:00,1,ppb\n2022-06-01 01:00,2,ug/m3\n")
    args = ["daily", str(mixed), "--time", "time", "--value", "v", "--unit-column", "unit", "--statistic",
            "mean", "--out", str(tmp_path / "x.csv")]  # fmt: skip
    assert main(args) == 2
    assert "mixes units" in capsys.readouterr().err


def test_negative_warning_and_na_codes(tmp_path, capsys):
    lines = ["time,v"] + [f"2022-06-01 {h:02d}:00,{-1 if h == 0 else (-999 if h == 1 else 10)}" for h in range(24)]
    path = write(tmp_path, "\n".join(lines) + "\n")
    out = tmp_path / "x.csv"
    args = ["daily", str(path), "--time", "time", "--value", "v", "--statistic", "mean", "--na-values", "-999",
            "--negative", "drop", "--out", str(out)]  # fmt: skip
    assert main(args) == 0
    assert "1 negative values in 'v' (rows 2)" in capsys.readouterr().err
    daily = pd.read_csv(out)
    assert daily["n_hours"].iloc[0] == 22 and daily["v"].iloc[0] == 10.0


def test_hour_ending_option(tmp_path):
    lines = ["time,v"] + [f"2022-06-01 {h:02d}:00,{h}" for h in range(1, 24)] + ["2022-06-01 24:00,24"]
    path = write(tmp_path, "\n".join(lines) + "\n")
    out = tmp_path / "x.csv"
    args = ["daily", str(path), "--time", "time", "--value", "v", "--statistic", "mean", "--hour-label", "end",
            "--out", str(out)]  # fmt: skip
    assert main(args) == 0
    daily = pd.read_csv(out)
    assert daily.to_dict("records") == [{"date": "2022-06-01", "v": 12.5, "n_hours": 24}]
