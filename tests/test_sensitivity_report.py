"""The sensitivity figure and report section: what is drawn and written, from a table of known rows."""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
import pytest

from airhealth.report.document import CAUTION, Figure, Section, Table, Text
from airhealth.report.sensitivity_plots import plot_sensitivity, sensitivity_section, setting_labels
from airhealth.studies.sensitivity import SENSITIVITY_COLUMNS


@pytest.fixture
def table():
    """A hand-made sensitivity table: the main model, two df settings (one the main), a failed one, a period."""
    rows = [
        ("main", "main model", True, 1.008, 0.999, 1.017, None),
        ("trend_df_per_year", "4 df/year", False, 1.010, 1.001, 1.019, None),
        ("trend_df_per_year", "7 df/year", True, 1.008, 0.999, 1.017, None),
        ("trend_df_per_year", "30 df/year", False, np.nan, np.nan, np.nan, "too few days per parameter"),
        ("exclude_periods", "fl$u$ (2012-01-10 to 2012-02-20)", False, 1.009, 0.998, 1.020, None),
    ]
    frame = pd.DataFrame(rows, columns=["check", "setting", "is_main", "rr", "rr_low", "rr_high", "error"])
    frame = frame.assign(outcome="deaths_all", exposure="pm25", lag="0-1", per=10.0, unit="µg/m³", p_value=0.08,
                         qaic=23699.5, n_days=4946, n_excluded=[0, 0, 0, 0, 42])  # fmt: skip
    return frame.reindex(columns=SENSITIVITY_COLUMNS)


def test_figure_marks_the_main_model_and_names_the_unit(table):
    before = plt.get_fignums()
    ax = plot_sensitivity(table)
    assert plt.get_fignums() == before  # no pyplot figure created
    assert ax.get_xlabel() == "relative risk per 10 µg/m³ (95% CI)"
    labels = [t.get_text() for t in ax.get_yticklabels()]
    assert labels == [
        "main model",
        "time trend: 4 df/year",
        "time trend: 7 df/year",
        "time trend: 30 df/year",
        r"period left out: fl\$u\$ (2012-01-10 to 2012-02-20)",
    ]  # fmt: skip  (drawn from the top; a user's $ is shown as written, not as mathematics)
    squares = [line for line in ax.get_lines() if line.get_marker() == "s"]
    circles = [line for line in ax.get_lines() if line.get_marker() == "o"]
    assert len(squares) == 1 and list(squares[0].get_xdata()) == [1.008, 1.008]  # the two main-model rows
    assert len(circles) == 1 and list(circles[0].get_xdata()) == [1.010, 1.009]  # the failed row is not drawn
    assert [t.get_text().strip() for t in ax.texts] == ["not estimable"]
    vertical = sorted(line.get_xdata()[0] for line in ax.get_lines() if list(line.get_ydata()) == [0, 1])
    assert vertical == [1.0, 1.008]  # no effect, and the main model's estimate


def test_figure_draws_on_a_given_axes(table):
    from matplotlib.figure import Figure as MplFigure

    ax = MplFigure().add_subplot()
    assert plot_sensitivity(table, level=0.9, ax=ax) is ax
    assert ax.get_xlabel().endswith("(90% CI)")


def test_setting_labels_name_the_check(table):
    assert setting_labels(table)[1] == "time trend: 4 df/year"


def test_section_holds_text_table_and_figure(table):
    section = sensitivity_section(table)
    assert isinstance(section, Section) and section.title == "Sensitivity analyses"
    text, shown, figure = section.blocks
    assert isinstance(text, Text) and CAUTION in text.text and "deaths_all and pm25, lag 0-1" in text.text
    assert isinstance(shown, Table) and isinstance(figure, Figure)
    column = "RR per 10 µg/m³ (95% CI)"
    assert list(shown.frame[column]) == [
        "1.008 (0.999 to 1.017)",
        "1.010 (1.001 to 1.019)",
        "1.008 (0.999 to 1.017)",
        "not estimable",
        "1.009 (0.998 to 1.020)",
    ]  # fmt: skip  (widths about 0.02: 3 decimals by the report rule, numbers.rr_decimals)
    assert list(shown.frame["main model"]) == ["yes", "", "yes", "", ""]
    assert list(shown.frame["days left out"]) == [0, 0, 0, 0, 42]
    assert shown.frame.loc[3, "error"] == "too few days per parameter"
    assert shown.count_columns == ()  # relative risks and days, no health counts


def test_section_is_written_by_the_html_writer_with_user_text_escaped(table, tmp_path):
    from airhealth.report.html import write_html_report

    table = table.assign(setting=table["setting"].str.replace("fl$u$", "<script>flu</script>", regex=False))
    section = sensitivity_section(table, name="sens<x>")
    index = write_html_report([section], tmp_path / "report", small_count_threshold=5)
    page = index.read_text(encoding="utf-8")
    assert "Sensitivity analyses" in page and "&lt;script&gt;flu&lt;/script&gt;" in page
    assert "<script>" not in page
    folder = tmp_path / "report"
    assert list((folder / "figures").glob("*.png")) and list((folder / "tables").glob("*.csv"))
