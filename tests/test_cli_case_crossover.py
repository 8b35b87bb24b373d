"""``airhealth fit ... --design case-crossover [--overdispersion off]``: the JSON of the time-series fit plus
the strata counts, equal to the Python fit; bad values name the option."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

import airhealth
from airhealth.cli.main import main

STRATA_KEYS = {"n_strata", "n_strata_without_events", "n_strata_single_day"}


@pytest.fixture(scope="module")
def sample_csv(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("cli_cc") / "norhaven.csv"
    data = airhealth.load_sample()
    data[data["date"] < "2013-01-01"].to_csv(path, index=False)
    return path


def _fit_json(sample_csv: Path, capsys: pytest.CaptureFixture, *extra: str) -> dict:
    base = ["fit", str(sample_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--temperature", "temperature"]
    assert main([*base, "--json", *extra]) == 0
    return json.loads(capsys.readouterr().out)


@pytest.mark.parametrize(("switch", "family"), [((), "quasipoisson"), (("--overdispersion", "off"), "poisson")])
def test_cli_case_crossover_json_is_the_time_series_record_plus_strata(sample_csv, capsys, switch, family):
    time_series = _fit_json(sample_csv, capsys)
    record = _fit_json(sample_csv, capsys, "--design", "case-crossover", *switch)
    assert set(record) == set(time_series) | STRATA_KEYS
    assert record["design"] == "case-crossover" and time_series["design"] == "time-series"
    assert record["family"] == family
    data = airhealth.load_sample()
    python = airhealth.fit(
        data[data["date"] < "2013-01-01"], "deaths_all", "pm25", temperature="temperature",
        design="case-crossover", overdispersion=family == "quasipoisson",
    )  # fmt: skip
    expected = python.to_dict()
    for key in ("coef", "se", "rr", "dispersion", "n_days", *STRATA_KEYS):
        assert record[key] == pytest.approx(expected[key], rel=1e-12)


def test_cli_case_crossover_text_output_counts_the_strata(sample_csv, capsys):
    args = ["fit", str(sample_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--design", "case-crossover"]
    assert main(args) == 0
    out = capsys.readouterr().out
    assert "time-stratified case-crossover: 252 strata (year x month x day of week)" in out


@pytest.mark.parametrize(
    ("extra", "expected"),
    [
        (["--design", "casecrossover"], "design='casecrossover' is not a valid choice"),
        (["--design", "case-crossover", "--trend-df-per-year", "4"], "[on the command line: --trend-df-per-year]"),
    ],
)
def test_cli_bad_design_options_are_one_line_errors(sample_csv, capsys, extra, expected):
    args = ["fit", str(sample_csv), "--outcome", "deaths_all", "--exposure", "pm25", *extra]
    assert main(args) == 2
    assert expected in capsys.readouterr().err


def test_cli_overdispersion_accepts_only_on_or_off(sample_csv, capsys):
    with pytest.raises(SystemExit) as stop:
        main(["fit", str(sample_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--overdispersion", "no"])
    assert stop.value.code == 2
    assert "--overdispersion: invalid choice: 'no' (choose from" in capsys.readouterr().err
