"""``airhealth fit --copollutant COL --modifier COL``: the extra JSON keys equal the Python result."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

import airhealth
from airhealth.cli.main import main


@pytest.fixture(scope="module")
def season_csv(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, object]:
    data = airhealth.load_sample()
    data = data[data["date"] < "2014-01-01"].assign(season=lambda d: airhealth.season_column(d["date"]))
    path = tmp_path_factory.mktemp("copoll") / "daily.csv"
    data.to_csv(path, index=False)
    return path, data


def test_fit_json_includes_copollutants_groups_and_the_test(season_csv, capsys) -> None:
    path, data = season_csv
    args = ["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25", "--temperature", "temperature"]
    code = main([*args, "--copollutant", "no2", "--copollutant", "o3", "--modifier", "season", "--json"])
    assert code == 0
    record = json.loads(capsys.readouterr().out)
    expected = airhealth.fit(
        data, "deaths_all", "pm25", temperature="temperature", copollutants=["no2", "o3"], modifier="season"
    ).to_dict()
    assert [c["copollutant"] for c in record["copollutants"]] == ["no2", "o3"]
    assert record["copollutants"][1]["coef"] == pytest.approx(expected["copollutants"][1]["coef"], rel=1e-12)
    assert [g["group"] for g in record["groups"]] == ["cold", "warm"]
    assert record["groups"][1]["rr"] == pytest.approx(expected["groups"][1]["rr"], rel=1e-12)
    assert record["modification_test"]["p_value"] == pytest.approx(expected["modification_test"]["p_value"])
    assert record["rr"] is None and "events" not in record["groups"][0]  # no unsuppressed counts in the JSON


def test_fit_text_lists_group_effects_and_copollutant(season_csv, capsys) -> None:
    path, _ = season_csv
    code = main(
        ["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25", "--copollutant", "no2",
         "--unit", "no2=ppb", "--modifier", "season"]
    )  # fmt: skip
    out = capsys.readouterr().out
    assert code == 0
    assert "effect by season" in out and "  cold: RR" in out and "equal effects: Wald chi-square" in out
    assert "co-pollutant no2 (adjusted for pm25): RR per 10 ppb" in out


def test_fit_collinear_copollutant_is_a_one_line_error(season_csv, capsys, tmp_path) -> None:
    _, data = season_csv
    copy = data.assign(pm25_twin=data["pm25"] + 0.01)
    twin = tmp_path / "twin.csv"
    copy.to_csv(twin, index=False)
    code = main(["fit", str(twin), "--outcome", "deaths_all", "--exposure", "pm25", "--copollutant", "pm25_twin"])
    err = capsys.readouterr().err
    assert code == 2
    assert "exposure 'pm25' and co-pollutant 'pm25_twin'" in err and "nearly collinear" in err
