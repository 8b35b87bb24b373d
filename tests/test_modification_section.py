"""Report sections for the co-pollutant table and effects by group: content, escaping, no health counts."""

from __future__ import annotations

import warnings

import pandas as pd
import pytest

import airhealth
from airhealth.errors import DataWarning, SpecificationError
from airhealth.report.document import Table, Text
from airhealth.report.html import write_html_report
from airhealth.report.modification_section import copollutant_section, group_effects_section, modification_section


@pytest.fixture(scope="module")
def data() -> pd.DataFrame:
    sample = airhealth.load_sample()
    sample = sample[sample["date"] < "2013-01-01"].reset_index(drop=True)
    # a level label with markup: the writer must escape it
    return sample.assign(season=airhealth.season_column(sample["date"]).map({"cold": "cold", "warm": "<b>warm</b>"}))


@pytest.fixture(scope="module")
def copoll_table(data) -> pd.DataFrame:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        return airhealth.copollutant_table(data, exposure="pm25", copollutants=["no2"], outcome="deaths_all")


@pytest.fixture(scope="module")
def grouped(data) -> airhealth.FitResult:
    return airhealth.fit(data, "deaths_all", "pm25", modifier="season")


def test_copollutant_section_shows_each_model_with_its_interval(copoll_table):
    section = copollutant_section(copoll_table)
    table = next(b for b in section.blocks if isinstance(b, Table))
    assert table.frame["adjusted for"].tolist() == ["none (single pollutant)", "no2"]
    rr = copoll_table["rr"].iloc[1]
    assert table.frame.iloc[1, 3].startswith(f"{rr:.3f} (")
    assert any("not proof" in b.text for b in section.blocks if isinstance(b, Text))
    assert table.count_columns == () and "events" not in table.frame  # no health counts to suppress


def test_group_section_shows_each_level_and_the_test(grouped):
    section = group_effects_section(grouped)
    table = next(b for b in section.blocks if isinstance(b, Table))
    assert table.frame["season"].tolist() == ["<b>warm</b>", "cold"]  # levels sorted as text: "<" before "c"
    p = grouped.modification_test()["p_value"]
    assert f"p = {p:.2g}" in table.note  # two significant digits: the report rule (numbers.format_p)


def test_sections_are_written_escaped(copoll_table, grouped, tmp_path):
    index = write_html_report([modification_section(copoll_table, grouped)], tmp_path / "report")
    page = index.read_text(encoding="utf-8")
    assert "&lt;b&gt;warm&lt;/b&gt;" in page and "<b>warm</b>" not in page
    assert "Single- and two-pollutant estimates" in page


def test_sections_refuse_the_wrong_input(data):
    plain = airhealth.fit(data, "deaths_all", "pm25")
    with pytest.raises(SpecificationError, match="needs a fit with a modifier"):
        group_effects_section(plain)
    with pytest.raises(SpecificationError, match="missing columns"):
        copollutant_section(pd.DataFrame({"rr": [1.0]}))
    with pytest.raises(SpecificationError, match="needs a co-pollutant table, a fit with a modifier, or both"):
        modification_section()


def test_notebook_view_of_a_grouped_fit_is_escaped(grouped):
    page = grouped._repr_html_()
    assert "&lt;b&gt;warm&lt;/b&gt;" in page and "<b>warm</b>" not in page
    assert "Wald chi-square" in page and "events" not in page
