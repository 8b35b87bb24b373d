"""Common spellings of a concentration unit are shown one way in every label (``ugm3`` → ``µg/m³``).

Reference: the SI symbols µg/m³, mg/m³, ng/m³ (BIPM, The International System of Units, 9th edition,
2019: the prefixes micro µ, milli m, nano n; the cubic metre m³) and the mixing ratios ppb / ppm as
written in air-quality reporting (common practice, no source).
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

import airhealth
from airhealth.cli.main import main
from airhealth.model.spec import ModelSpec


@pytest.mark.parametrize(
    ("given", "shown"),
    [
        ("ugm3", "µg/m³"),
        ("ug/m3", "µg/m³"),
        ("µg/m3", "µg/m³"),
        (" UG/M3 ", "µg/m³"),
        ("μg/m3", "µg/m³"),  # Greek mu
        ("mg/m3", "mg/m³"),
        ("mgm3", "mg/m³"),
        ("ng/m3", "ng/m³"),
        ("ngm3", "ng/m³"),
        ("PPB", "ppb"),
        ("ppbv", "ppb"),
        ("ppm", "ppm"),
        ("particles/cm3", "particles/cm3"),  # not a unit known here: kept as written
    ],
)
def test_a_unit_spelling_is_shown_one_way(given, shown):
    assert ModelSpec(outcome="y", exposure="x", unit=given).unit == shown


def test_fit_and_command_line_labels_read_micrograms(sample, tmp_path: Path, capsys):
    data = sample[["date", "deaths_all", "pm25"]].iloc[:730]
    result = airhealth.fit(data, "deaths_all", "pm25", units={"pm25": "ugm3"})
    assert "per 10 µg/m³" in str(result.effect())
    assert result.to_dict()["unit"] == "µg/m³"
    path = tmp_path / "city.csv"
    data.to_csv(path, index=False)
    capsys.readouterr()
    assert main(["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25", "--unit", "pm25=ugm3"]) == 0
    out = capsys.readouterr().out
    assert "per 10 µg/m³" in out and "ugm3" not in out


def test_report_tables_show_the_unit_one_way(sample, tmp_path: Path):
    data = sample[["date", "deaths_all", "pm25"]].iloc[:730]
    index = airhealth.write_report(data, ["deaths_all"], ["pm25"], ["0"], tmp_path / "rep", units={"pm25": "ug/m3"})
    effects = pd.read_csv(index.parent / "tables" / "effects_full.csv")
    assert effects["unit"].tolist() == ["µg/m³"]
    assert pd.read_csv(index.parent / "tables" / "effects.csv")["per"].tolist() == ["10 µg/m³"]
    assert "ug/m3" not in index.read_text(encoding="utf-8")


def test_align_of_one_table_says_one_table(sample, tmp_path: Path, capsys):
    path = tmp_path / "counts.csv"
    sample[["date", "deaths_all"]].iloc[:30].to_csv(path, index=False)
    capsys.readouterr()
    assert main(["align", str(path), "--out", str(tmp_path / "daily.csv")]) == 0
    assert "columns from 1 table;" in capsys.readouterr().out
    assert main(["align", str(path), "--out", str(tmp_path / "d2.csv"), "--start", "02/01/2010"]) == 2
    assert "start '02/01/2010' is not a date in ISO form" in capsys.readouterr().err
