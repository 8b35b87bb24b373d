"""``airhealth sensitivity``: the command line gives the Python table, writes its files, and names bad options.

Reference: :func:`airhealth.sensitivity` on the same data and settings (itself checked against single fits in
test_sensitivity.py); the JSON and CSV carry the same numbers (1e-12 relative: text round trip of doubles).
"""

from __future__ import annotations

import json
import warnings

import pandas as pd
import pytest

import airhealth
from airhealth.cli.main import main

ARGS = ["--outcome", "deaths_all", "--exposure", "pm25", "--temperature", "temperature"]


@pytest.fixture(scope="module")
def csv(tmp_path_factory):
    data = airhealth.load_sample()
    data = data[data["date"] < "2015-01-01"]
    path = tmp_path_factory.mktemp("sens") / "daily.csv"
    data.to_csv(path, index=False)
    return path, data


def python_table(data, **checks):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return airhealth.sensitivity(
            data, outcome="deaths_all", exposure="pm25", temperature="temperature", checks=checks
        )


def test_json_out_and_figure_equal_the_python_table(csv, tmp_path, capsys):
    path, data = csv
    out, figure = tmp_path / "table.csv", tmp_path / "figure.png"
    argv = ["sensitivity", str(path), *ARGS, "--time-df", "4,8", "--exclude-period",
            "flu=2012-01-10:2012-02-20", "--json", "--out", str(out), "--figure", str(figure)]  # fmt: skip
    assert main(argv) == 0
    records = json.loads(capsys.readouterr().out)
    expected = python_table(
        data,
        trend_df_per_year=[4.0, 8.0],
        temperature_df=[3, 9],
        temperature_lags=[(1, 7)],
        exclude_above_percentile=99.0,
        exclude_periods={"flu": ("2012-01-10", "2012-02-20")},
    )  # fmt: skip  (the default checks of a model with temperature, with --time-df and the period)
    assert [r["setting"] for r in records] == list(expected["setting"])
    for record, row in zip(records, expected.to_dict(orient="records"), strict=True):
        for key in ("coef", "se", "rr", "rr_low", "rr_high", "qaic"):
            assert record[key] == pytest.approx(row[key], rel=1e-12)
        assert record["error"] is None and record["n_days"] == row["n_days"]
    written = pd.read_csv(out)
    assert list(written.columns) == list(expected.columns)
    pd.testing.assert_series_equal(written["rr"], expected["rr"], rtol=1e-12)
    assert figure.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_printed_table_and_no_extreme_row(csv, capsys):
    path, _ = csv
    assert main(["sensitivity", str(path), *ARGS, "--time-df", "5", "--exclude-above-percentile", "none"]) == 0
    printed = capsys.readouterr().out
    assert "5 df/year" in printed and "percentile" not in printed
    assert "associations, not proof of causation" in printed


@pytest.mark.parametrize(
    ("extra", "message"),
    [
        (["--exclude-period", "flu=2012-01-10"], "--exclude-period 'flu=2012-01-10': write NAME=START:END"),
        (["--exclude-period", "a=2012-01-01:2012-02-01", "--exclude-period", "a=2013-01-01:2013-02-01"],
         "names the period 'a' twice"),
        (["--time-df", "four"], "--time-df 'four': give df per year separated by commas"),
        (["--exclude-above-percentile", "100"], "--exclude-above-percentile '100': give a percentile strictly"),
        (["--exclude-above-percentile", "high"], "--exclude-above-percentile 'high': give a percentile"),
        (["--exclude-period", "flu=2030-01-01:2030-02-01"],
         "exclusion period 'flu': no row of the data falls in the period 2030-01-01 to 2030-02-01"),
    ],
)  # fmt: skip
def test_bad_options_give_one_line_errors(csv, capsys, extra, message):
    path, _ = csv
    assert main(["sensitivity", str(path), *ARGS, "--time-df", "4", *extra]) == 2
    err = capsys.readouterr().err
    assert message in err and err.startswith("airhealth sensitivity: error:")
