"""``airhealth compare``: the table, JSON and CSV it writes, the options it shares with ``fit``, its errors.

Reference for the numbers: the Python :func:`airhealth.studies.compare.compare` on the same data (whose rows
equal the single fits, tests/test_compare_grid.py) and :func:`airhealth.fit` itself for one row on the common
days; the command line only reads, passes options and prints, so the values agree to 1e-12 relative (the JSON
writes floats with full precision: ``json`` round-trips repr) — to 1e-8 against the single fit, whose path
converges to the same point to ~1e-10.
"""

from __future__ import annotations

import json
import warnings

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.cli.compare import parse_df_list, parse_lag_list
from airhealth.cli.main import main
from airhealth.errors import SpecificationError
from airhealth.studies.compare import compare

OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}
ARGS = ["--outcome", "deaths_all", "--exposure", "pm25", "--temperature", "temperature"]
REQUIRED = ["lag", "trend_df_per_year", "coef", "se", "rr", "rr_low", "rr_high", "p_value", "qaic", "n_days"]


@pytest.fixture(scope="module")
def three_years():
    data = airhealth.load_sample()
    data = data[data["date"] < "2013-01-01"].reset_index(drop=True)
    data.loc[[30, 31, 400], "pm25"] = np.nan
    return data


@pytest.fixture
def csv(three_years, tmp_path):
    path = tmp_path / "city.csv"
    three_years.to_csv(path, index=False)
    return path


def quiet(call):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return call()


def run_json(capsys, *args):
    assert main(["compare", *args, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def test_json_has_one_object_per_model_equal_to_the_python_table(three_years, csv, capsys):
    rows = run_json(capsys, str(csv), *ARGS, "--lags", "0,2,0-1,dl0-3", "--trend-df-per-year", "4,8")
    table = quiet(lambda: compare(three_years, ["0", "2", "0-1", "dl0-3"], trend_df_per_year=[4, 8], **OPTIONS))
    assert len(rows) == 8 and all(set(REQUIRED) <= set(r) for r in rows)
    assert [(r["lag"], r["trend_df_per_year"]) for r in rows] == [
        (g, d) for g in ["0", "2", "0-1", "dl0-3"] for d in (4, 8)
    ]
    for row, expected in zip(rows, table.to_dict(orient="records"), strict=True):
        for key in ("coef", "se", "rr", "rr_low", "rr_high", "p_value", "qaic", "qaic_common", "delta_qaic_common"):
            assert row[key] == pytest.approx(expected[key], rel=1e-12), key
        assert row["n_days"] == expected["n_days"]
        assert (row["interval"], row["unit"], row["per"], row["days"]) == ("quasi-poisson", "µg/m³", 10.0, "common")
        assert row["first_day"] == f"{expected['first_day']:%Y-%m-%d}"
        assert row["qaic_common_from"] == "lag dl0-3, 8 df/year (47 coefficients)"


def test_a_json_row_equals_the_single_fit_on_the_common_days(three_years, csv, capsys):
    rows = run_json(capsys, str(csv), *ARGS, "--lags", "1,0-4", "--trend-df-per-year", "6")
    deepest = quiet(lambda: airhealth.fit(three_years, lag="0-4", trend_df_per_year=6, **OPTIONS))
    data = three_years.copy()  # the common days here are those of 0-4 (its window contains lag 1)
    data.loc[~data["date"].isin(deepest.observed.index), "deaths_all"] = np.nan
    single = quiet(lambda: airhealth.fit(data, lag="1", trend_df_per_year=6, **OPTIONS)).to_dict()
    for key in REQUIRED[2:-1]:
        assert rows[0][key] == pytest.approx(single[key], rel=1e-8), key
    assert rows[0]["n_days"] == single["n_days"] == deepest.n_days


def test_default_output_is_a_table_that_says_which_days_and_which_dispersion(csv, capsys):
    assert main(["compare", str(csv), *ARGS, "--lags", "0,dl0-2", "--trend-df-per-year", "5,7"]) == 0
    out = capsys.readouterr().out
    lines = out.splitlines()
    assert lines[0] == "deaths_all vs pm25"
    assert lines[1].split()[:4] == ["lag", "df/year", "RR", "per"]
    assert [line.split()[:2] for line in lines[2:6]] == [["0", "5"], ["0", "7"], ["dl0-2", "5"], ["dl0-2", "7"]]
    # the first day with temperature at lags 1-3 and pm25 at lags 0-2 is 4 January
    assert "days usable by every model (2010-01-04 to 2012-12-31)" in out
    assert "QAIC common: dispersion" in out and "of the largest model, lag dl0-2, 7 df/year" in out
    assert "associations" in out


def test_all_days_fits_each_model_on_its_own_days_and_warns_about_qaic(three_years, csv, capsys):
    assert main(["compare", str(csv), *ARGS, "--lags", "0,0-5", "--all-days", "--json"]) == 0
    captured = capsys.readouterr()
    rows = json.loads(captured.out)
    assert "warning: the models compared use different days" in captured.err
    assert {r["days"] for r in rows} == {"own"} and rows[0]["n_days"] > rows[1]["n_days"]
    single = quiet(lambda: airhealth.fit(three_years, lag="0", **OPTIONS))
    assert rows[0]["coef"] == pytest.approx(single.to_dict()["coef"], rel=1e-8)
    assert main(["compare", str(csv), *ARGS, "--lags", "0,0-5", "--all-days"]) == 0
    assert "each model's own usable days (--all-days)" in capsys.readouterr().out


def test_newey_west_intervals_are_said_in_the_json_and_the_table(three_years, csv, capsys):
    rows = run_json(capsys, str(csv), *ARGS, "--lags", "0,1", "--interval", "hac", "--hac-lags", "5")
    assert {(r["interval"], r["hac_lags"]) for r in rows} == {("hac", 5)}
    table = quiet(lambda: compare(three_years, ["0", "1"], interval="hac", hac_lags=5, **OPTIONS))
    np.testing.assert_allclose([r["se"] for r in rows], table["se"], rtol=1e-12)
    assert main(["compare", str(csv), *ARGS, "--lags", "0,1", "--interval", "hac", "--hac-lags", "5"]) == 0
    assert "intervals: Newey-West (HAC), truncation lag 5 days" in capsys.readouterr().out


def test_out_writes_the_full_table_as_csv(three_years, csv, tmp_path, capsys):
    target = tmp_path / "table.csv"
    assert main(["compare", str(csv), *ARGS, "--lags", "0,0-1", "--out", str(target), "--per", "5"]) == 0
    written = pd.read_csv(target)
    table = quiet(lambda: compare(three_years, ["0", "0-1"], per=5, **OPTIONS))
    assert list(written.columns) == [*table.columns, "level"]
    np.testing.assert_allclose(written["rr"], table["rr"], rtol=1e-12)
    assert list(written["first_day"]) == [f"{d:%Y-%m-%d}" for d in table["first_day"]]
    assert not list(tmp_path.glob("*.tmp*"))  # written atomically: no temporary file left


def test_reading_and_model_options_of_fit_apply(three_years, tmp_path, capsys):
    path = tmp_path / "semicolons.csv"
    three_years.to_csv(path, index=False, sep=";", decimal=",")
    args = [str(path), *ARGS, "--lags", "0", "--sep", ";", "--decimal", ",", "--start", "2011-01-01",
            "--humidity", "humidity", "--confidence", "90"]  # fmt: skip
    rows = run_json(capsys, *args)
    data = three_years[three_years["date"] >= "2011-01-01"]
    single = quiet(lambda: airhealth.fit(data, lag="0", humidity="humidity", **OPTIONS)).to_dict(level=0.9)
    for key in ("coef", "rr_low", "rr_high", "qaic"):
        assert rows[0][key] == pytest.approx(single[key], rel=1e-8), key
    assert rows[0]["level"] == 0.9 and rows[0]["n_days"] == single["n_days"]


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--lags", ","], "--lags ',' names no lag structure"),
        (["--lags", "0,,1"], "--lags '0,,1' has an empty item"),
        (["--lags", "0,x1"], "lag 'x1' is not understood"),
        (["--lags", "0,0"], "lag '0' is given twice"),
        (["--lags", "0,dl0-2000"], "lag dl0-2000 reaches back 2000 days but the series has only"),
        (["--lags", "0,0-900"], "too few usable days (0)"),
        (["--lags", "0", "--trend-df-per-year", "4,0"], "--trend-df-per-year '4,0': '0' is not a number of df"),
        (["--lags", "0", "--trend-df-per-year", "-3"], "'-3' is not a number of df per year > 0"),
        (["--lags", "0", "--trend-df-per-year", "4,six"], "'six' is not a number of df per year > 0"),
        (["--lags", "0", "--interval", "robust"], "interval='robust' is not a valid choice"),
        (["--lags", "0", "--min-count", "1"], "--min-count applies to moving-average lags"),
    ],
)
def test_bad_input_is_one_line_naming_the_value_and_exit_2(csv, capsys, args, message):
    assert main(["compare", str(csv), "--outcome", "deaths_all", "--exposure", "pm25", *args]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert err[-1].startswith("airhealth compare: error: ") and message in err[-1]


def test_lag_lists_split_on_commas_or_semicolons_and_keep_knot_lists():
    labels = [lag.label for lag in parse_lag_list("0, 2 ,0-1,dl0-5")]
    assert labels == ["0", "2", "0-1", "dl0-5"]
    knots = [lag.label for lag in parse_lag_list("0,dl0-21:spline:knots=2,5,10,0-3")]
    assert len(knots) == 3 and knots[0] == "0" and knots[2] == "0-3" and "2,5,10" in knots[1]
    assert parse_lag_list("0-3;dl0-21:spline:knots=2,5,10")[0].label == "0-3"
    assert [lag.label for lag in parse_lag_list("0-3,1", min_count=2)] == ["0-3 min 2", "1"]


def test_df_lists_read_whole_numbers_as_integers():
    assert parse_df_list("7") == [7] and parse_df_list("4, 6.5,8") == [4, 6.5, 8]
    with pytest.raises(SpecificationError, match=r"'' is not a number of df per year"):
        parse_df_list("4,")


def test_compare_is_listed_in_the_help(capsys):
    with pytest.raises(SystemExit):
        main(["--help"])
    assert "compare" in capsys.readouterr().out


def test_compare_given_lag_instead_of_lags_says_which_to_use() -> None:
    data = airhealth.load_sample().iloc[:800]
    with pytest.raises(SpecificationError, match=r"lags=\[\.\.\.\], not lag='0'"):
        airhealth.compare(data, ["0-1"], lag="0", outcome="deaths_all", exposure="pm25")
