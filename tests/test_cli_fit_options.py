"""``fit`` (and ``report``) options have the effect of their Python counterparts, and every remedy a message
names in Python terms has a command-line spelling.

Reference for each option: the same model fitted in Python with the option's Python spelling (itself
checked against R elsewhere); numbers go through JSON, which keeps doubles exactly (shortest repr).
"""

from __future__ import annotations

import argparse
import json
import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.cli.main import build_parser, main
from airhealth.cli.remedies import REMEDIES, with_command_line_remedy
from airhealth.simulate import simulate_city

EXACT = 1e-12  # the same computation on the same numbers: only the last bits may differ
ROOT = Path(__file__).resolve().parents[1]
#: Remedies named in messages of the model and prep layers (checked to still be there, below).
PHRASES = (
    "MovingAverage(first, last, min_count=1)",
    "trend_df_per_year",
    "temperature_df",
    "theta_method=",
    ".dt.month",
    "--duplicates",
)


@pytest.fixture(scope="module")
def city() -> pd.DataFrame:
    tables = simulate_city(3, "2015-01-01", "2017-12-31")
    return airhealth.align_daily(tables["counts"], tables["pollution"], tables["weather"])


@pytest.fixture(scope="module")
def city_csv(city: pd.DataFrame, tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("opts") / "city.csv"
    city.to_csv(path, index=False, date_format="%Y-%m-%d")
    return path


def _json(capsys: pytest.CaptureFixture, path: Path, *extra: str) -> dict:
    capsys.readouterr()
    code = main(["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25", "--json", *extra])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    return json.loads(captured.out)


def _json_args(capsys: pytest.CaptureFixture, args: list[str]) -> dict:
    capsys.readouterr()
    code = main(args)
    captured = capsys.readouterr()
    assert code == 0, captured.err
    return json.loads(captured.out)


def _same(record: dict, result: airhealth.FitResult, per: float = 10.0, level: float = 0.95) -> None:
    expected = result.to_dict(per=per, level=level)
    for key in ("coef", "se", "rr", "rr_low", "rr_high"):
        assert record[key] == pytest.approx(expected[key], rel=EXACT), key
    assert record["n_days"] == expected["n_days"]


def test_start_and_end_restrict_the_period(city, city_csv, capsys):
    record = _json(capsys, city_csv, "--start", "2015-06-01", "--end", "2017-05-31", "--trend-df-per-year", "4")
    part = city[(city["date"] >= "2015-06-01") & (city["date"] <= "2017-05-31")]
    _same(record, airhealth.fit(part, outcome="deaths_all", exposure="pm25", trend_df_per_year=4))
    capsys.readouterr()
    assert main(["fit", str(city_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--start", "2019-01-01"]) == 2
    assert (
        "no row of city.csv falls in the period 2019-01-01 to the end: its dates run from 2015-01-01 to 2017-12-31"
        in (capsys.readouterr().err)
    )
    assert main(["fit", str(city_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--start", "2016-13-01"]) == 2
    assert "start '2016-13-01' is not a date" in capsys.readouterr().err


def test_na_values_codes_become_missing(city, tmp_path, capsys):
    coded = city.copy()
    coded.loc[[10, 200, 300], "pm25"] = -999
    path = tmp_path / "coded.csv"
    coded.to_csv(path, index=False, date_format="%Y-%m-%d")
    record = _json(capsys, path, "--na-values", "-999")
    clean = city.assign(pm25=city["pm25"].where(~city.index.isin([10, 200, 300])))
    _same(record, airhealth.fit(clean, outcome="deaths_all", exposure="pm25"))


def test_min_count_is_the_moving_average_option(city, city_csv, capsys):
    record = _json(capsys, city_csv, "--lag", "0-3", "--min-count", "2")
    lag = airhealth.MovingAverage(0, 3, min_count=2)
    _same(record, airhealth.fit(city, outcome="deaths_all", exposure="pm25", lag=lag))
    plain = airhealth.fit(city, outcome="deaths_all", exposure="pm25", lag="0-3")
    assert record["n_days"] > plain.n_days  # the option changed which days count
    assert (
        main(["fit", str(city_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--lag", "1", "--min-count", "1"])
        == 2
    )
    assert "--min-count applies to moving-average lags such as 0-3, and none is given (lags: 1)" in (
        capsys.readouterr().err
    )


def test_confidence_sets_the_level(city, city_csv, capsys):
    record = _json(capsys, city_csv, "--confidence", "0.9", "--per", "5")
    _same(record, airhealth.fit(city, outcome="deaths_all", exposure="pm25"), per=5, level=0.9)
    assert _json(capsys, city_csv, "--confidence", "90", "--per", "5")["rr_low"] == record["rr_low"]  # per cent
    assert main(["fit", str(city_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--confidence", "1.5"]) == 2
    assert "--confidence '1.5' is not a confidence level" in capsys.readouterr().err


def test_duplicated_days_merge_on_request(city, tmp_path, capsys):
    doubled = pd.concat([city, city.iloc[[5]]], ignore_index=True)
    path = tmp_path / "doubled.csv"
    doubled.to_csv(path, index=False, date_format="%Y-%m-%d")
    assert main(["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25"]) == 2
    assert "on the command line --duplicates mean or --duplicates first" in capsys.readouterr().err
    record = _json(capsys, path, "--duplicates", "first")
    _same(record, airhealth.fit(city, outcome="deaths_all", exposure="pm25"))


def test_unit_must_name_the_exposure(city_csv, capsys):
    assert main(["fit", str(city_csv), "--outcome", "deaths_all", "--exposure", "o3", "--unit", "O3=ppb"]) == 2
    assert "--unit 'O3=ppb' names 'O3', which is not an exposure (o3)" in capsys.readouterr().err


def _option_strings(command: str) -> set[str]:
    parser = build_parser()
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    return {s for action in sub.choices[command]._actions for s in action.option_strings}


@pytest.mark.parametrize("command", ["fit", "report"])
def test_every_remedy_has_an_option_in_fit_and_report(command):
    options = _option_strings(command)
    for phrase, spelling in REMEDIES.items():
        flags = re.findall(r"--[a-z-]+", spelling)
        assert all(f in options for f in flags), (phrase, spelling)
    for flag in ("--start", "--end", "--na-values", "--date-format", "--encoding", "--min-count", "--confidence",
                 "--unit", "--duplicates", "--sep", "--decimal", "--months", "--temperature-df",
                 "--theta-method"):  # fmt: skip
        assert flag in options


def test_messages_in_the_tree_that_name_a_python_remedy_get_a_command_line_spelling():
    """Scan the model and prep messages for the remedies they name; each must translate for the CLI."""
    sources = [*ROOT.joinpath("airhealth", "model").glob("*.py"), *ROOT.joinpath("airhealth", "prep").glob("*.py")]
    hourly = {"hourly.py", "hourly_input.py", "monitors.py", "units.py"}  # `daily` has its own options
    found = []
    for path in sources:
        if path.name in hourly:
            continue
        for phrase in PHRASES:
            if phrase in path.read_text(encoding="utf-8"):
                found.append(phrase)
                if not phrase.startswith("--"):
                    assert "[on the command line:" in with_command_line_remedy(f"... {phrase} ..."), phrase
    assert {"MovingAverage(first, last, min_count=1)", ".dt.month", "temperature_df", "--duplicates"} <= set(found)


def test_fit_error_names_the_command_line_remedy(city, tmp_path, capsys):
    sparse = city.copy()
    sparse.loc[sparse.index % 3 != 0, "pm25"] = np.nan  # every third day: no consecutive days for 0-1
    path = tmp_path / "sparse.csv"
    sparse.to_csv(path, index=False, date_format="%Y-%m-%d")
    assert main(["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25", "--lag", "0-2"]) == 2
    err = capsys.readouterr().err
    assert "MovingAverage(first, last, min_count=1)" in err and "[on the command line: --min-count N]" in err
    assert _json(capsys, path, "--lag", "0-2", "--min-count", "1")["n_days"] > 0


def test_na_values_leave_the_outcome_counts_alone(city, tmp_path, capsys):
    """A code such as 0 for a missing reading must not erase a day with no deaths."""
    data = city.copy()
    data.loc[5, "deaths_all"] = 0
    data.loc[7, "pm25"] = 0.0
    path = tmp_path / "zeros.csv"
    data.to_csv(path, index=False, date_format="%Y-%m-%d")
    record = _json(capsys, path, "--na-values", "0", "--lag", "0")
    expected = data.assign(pm25=data["pm25"].where(data.index != 7))
    _same(record, airhealth.fit(expected, outcome="deaths_all", exposure="pm25", lag="0"))


def test_summer_only_exposure_points_at_months_and_months_fits(city, tmp_path, capsys):
    summer = city.assign(o3=city["o3"].where(city["date"].dt.month.between(4, 9)))
    path = tmp_path / "summer.csv"
    summer.to_csv(path, index=False, date_format="%Y-%m-%d")
    args = ["fit", str(path), "--outcome", "deaths_all", "--exposure", "o3", "--lag", "0"]
    assert main(args) == 2
    err = capsys.readouterr().err
    assert "measured only in" in err and "[on the command line: --trend-df-per-year; --months FIRST-LAST]" in err
    record = _json_args(capsys, [*args, "--months", "4-9", "--trend-df-per-year", "3.5", "--json"])
    kept = summer[summer["date"].dt.month.between(4, 9)]
    with pytest.warns(airhealth.DataWarning):  # the winters are calendar gaps
        expected = airhealth.fit(kept, outcome="deaths_all", exposure="o3", lag="0", trend_df_per_year=3.5)
    _same(record, expected)


def test_na_values_take_codes_separated_by_spaces_as_the_messages_write_them(city, tmp_path, capsys):
    coded = city.copy()
    coded.loc[[10, 20], "pm25"] = -999
    coded.loc[30, "pm25"] = -99
    path = tmp_path / "two_codes.csv"
    coded.to_csv(path, index=False, date_format="%Y-%m-%d")
    record = _json(capsys, path, "--na-values", "-999", "-99")
    clean = city.assign(pm25=city["pm25"].where(~city.index.isin([10, 20, 30])))
    _same(record, airhealth.fit(clean, outcome="deaths_all", exposure="pm25"))
