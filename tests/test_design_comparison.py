"""``airhealth.compare_designs`` and its report section: time series and case-crossover side by side.

Each row must equal the single fit of its design (the same engine path; 1e-12 relative, rounding only); the
single fits themselves are checked against R and statsmodels in tests/test_case_crossover*.py.
"""

from __future__ import annotations

import numpy as np
import pytest

import airhealth
from airhealth.errors import SpecificationError
from airhealth.report.design_section import design_section, designs_side_by_side
from airhealth.report.document import Table, Text
from airhealth.report.html import write_html_report
from airhealth.studies.design_comparison import DESIGN_COLUMNS


@pytest.fixture(scope="module")
def two_years(_sample_once):
    return _sample_once[_sample_once["date"] < "2012-01-01"].reset_index(drop=True)


@pytest.fixture(scope="module")
def table(two_years):
    return airhealth.compare_designs(
        two_years, "deaths_all", "pm25", lags=["0", "dl0-3"], temperature="temperature", trend_df_per_year=6
    )


def test_each_row_equals_the_single_fit_of_its_design(two_years, table):
    assert list(table.columns) == list(DESIGN_COLUMNS)
    assert table[["lag", "design"]].values.tolist() == [
        ["0", "time-series"], ["0", "case-crossover"], ["dl0-3", "time-series"], ["dl0-3", "case-crossover"],
    ]  # fmt: skip
    for row in table.itertuples():
        options = {"trend_df_per_year": 6} if row.design == "time-series" else {}  # time options: time series only
        single = airhealth.fit(
            two_years, "deaths_all", "pm25", lag=row.lag, temperature="temperature", design=row.design, **options
        )
        assert row.coef == pytest.approx(single.exposure_coef, rel=1e-12)
        assert row.se == pytest.approx(single.exposure_se, rel=1e-12)
        assert row.n_days == single.n_days
        if row.design == "case-crossover":
            assert row.n_strata == single.strata["n_strata"] == 168  # 24 months x 7 days of the week
        else:
            assert np.isnan(row.n_strata)


def test_design_option_is_refused_and_negbin_names_the_case_crossover(two_years):
    with pytest.raises(SpecificationError, match="compare_designs fits both designs: remove the design option"):
        airhealth.compare_designs(two_years, "deaths_all", "pm25", design="time-series")
    with pytest.raises(SpecificationError, match="not family='negbin'"):
        airhealth.compare_designs(two_years, "deaths_all", "pm25", family="negbin")


def test_side_by_side_shows_each_design_in_its_own_column(table):
    shown = designs_side_by_side(table)
    assert shown["lag"].tolist() == ["0", "dl0-3"]
    ts = table[table["design"] == "time-series"].iloc[0]
    cc = table[table["design"] == "case-crossover"].iloc[0]
    assert shown.iloc[0]["time series: RR per 10 µg/m³ (CI)"] == (f"{ts.rr:.3f} ({ts.rr_low:.3f} to {ts.rr_high:.3f})")
    assert shown.iloc[0]["case-crossover: RR (CI)"] == f"{cc.rr:.3f} ({cc.rr_low:.3f} to {cc.rr_high:.3f})"
    assert shown.iloc[0]["case-crossover: strata"] == 168


def test_side_by_side_names_missing_columns(table):
    with pytest.raises(SpecificationError, match="lacks the column\\(s\\) 'n_strata'"):
        designs_side_by_side(table.drop(columns="n_strata"))


def test_design_section_blocks_and_written_page_say_association(table, tmp_path):
    section = design_section(table)
    assert isinstance(section.blocks[0], Text) and "not proof of causation" in section.blocks[0].text
    assert [b.name for b in section.blocks if isinstance(b, Table)] == ["design_comparison", "design_comparison_tidy"]
    index = write_html_report([section], tmp_path / "report")
    page = index.read_text(encoding="utf-8")
    assert "Time series and case-crossover" in page and "case-crossover: RR (CI)" in page
    assert (index.parent / "tables" / "design_comparison_tidy.csv").exists()


def test_report_methods_text_describes_the_case_crossover():
    from airhealth.model.spec import ModelSpec
    from airhealth.report.city_report import describe_model

    spec = ModelSpec("deaths_all", "pm25", temperature="temperature", design="case-crossover")
    text = describe_model(spec, 5113)
    assert text.startswith(
        "Time-stratified case-crossover over 5113 days (14.0 years), fitted as a conditional quasi-Poisson model"
    )
    assert "spline of time" not in text and "day-of-week indicators" not in text
    assert "natural splines of same-day temperature (6 df)" in text


def test_one_lag_given_as_lag_is_accepted_and_both_forms_are_refused(two_years, table):
    # review defect: lag= gave a raw TypeError
    one = airhealth.compare_designs(two_years, "deaths_all", "pm25", lag="0", temperature="temperature",
                                    trend_df_per_year=6)  # fmt: skip
    assert one["lag"].tolist() == ["0", "0"]
    np.testing.assert_allclose(one["coef"], table["coef"].iloc[:2], rtol=1e-12)
    with pytest.raises(SpecificationError, match=r"got both lag='0' and lags=\['0-1'\]: give one lag as lag="):
        airhealth.compare_designs(two_years, "deaths_all", "pm25", lag="0", lags=["0-1"])
