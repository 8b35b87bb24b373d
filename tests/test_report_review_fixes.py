"""Report-layer fixes from the independent review: one formatting rule for every RR and p-value shown,
units taken from the results (never "per 10 units"), and the p-value / decimals edge cases.

Expected strings are hand-written from the rules documented in ``airhealth/report/numbers.py`` (common
journal practice, no source); the fixed-form τ² is checked against numpy's own positional formatter.
"""

from __future__ import annotations

from html import escape as html_escape

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.errors import SpecificationError
from airhealth.report.cities_section import cities_section
from airhealth.report.design_section import designs_side_by_side
from airhealth.report.forest_plot import forest_figure, plot_forest, pooled_forest_table, pooled_summary
from airhealth.report.modification_section import copollutant_section
from airhealth.report.numbers import format_p, format_rr, rr_decimals
from airhealth.report.sensitivity_plots import sensitivity_section
from airhealth.report.tables import format_effects

# --- numbers.py edge cases ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("p", "text"),
    [
        (0.0499999, "<0.05"),  # two significant digits would print "0.050": rounding must not cross 0.05
        (0.0495, "<0.05"),
        (0.0494, "0.049"),
        (0.05, "0.050"),
        (0.0501, "0.050"),
        (1.0 + 1e-12, "1.0"),  # 2 * (1 - cdf) a hair above 1 by rounding error
    ],
)
def test_p_values_never_round_across_0_05(p, text):
    assert format_p(p) == text


def test_a_missing_p_is_empty_and_one_outside_0_1_is_refused():
    assert format_p(float("nan")) == ""
    with pytest.raises(SpecificationError, match=r"format_p got 1\.2, which is not a p-value .*between 0 and 1"):
        format_p(1.2)
    with pytest.raises(SpecificationError, match=r"format_p got -0\.01"):
        format_p(-0.01)


def test_a_very_narrow_interval_gets_enough_decimals_to_show_its_bounds():
    # width 2e-5: first significant digit at the 5th decimal, plus one -> 6 (the old cap of 4 printed
    # "1.0000 (1.0000 to 1.0000)")
    assert rr_decimals(0.99999, 1.00001) == 6
    assert format_rr(1.0, 0.99999, 1.00001) == "1.000000 (0.999990 to 1.000010)"


def test_rr_and_rr_per_iqr_in_one_row_share_their_decimals():
    table = pd.DataFrame({
        "rr": [1.00834], "rr_low": [0.99912], "rr_high": [1.01721],  # width 0.018: 3 decimals alone
        "rr_iqr": [1.0123], "rr_iqr_low": [1.0101], "rr_iqr_high": [1.0145],  # width 0.0044: 4 alone
        "exposure_iqr": [12.0], "unit": ["µg/m³"], "p_value": [0.07],
    })  # fmt: skip
    shown = format_effects(table)
    assert shown["RR (95% CI)"].iloc[0] == "1.0083 (0.9991 to 1.0172)"
    assert shown["RR per IQR (95% CI)"].iloc[0] == "1.0123 (1.0101 to 1.0145)"


# --- every RR / p in the report goes through numbers.py ----------------------------------------------


def _design_table(style_rows: list[tuple[str, float, float, float]]) -> pd.DataFrame:
    rows = []
    for design, rr, low, high in style_rows:
        rows.append({
            "outcome": "deaths", "exposure": "pm25", "lag": "0", "design": design, "per": 10.0, "unit": "µg/m³",
            "coef": 0.0, "se": 0.0, "rr": rr, "rr_low": low, "rr_high": high, "percent_change": 0.0,
            "p_value": 0.2, "dispersion": 1.0, "family": "quasipoisson", "n_days": 1000, "n_strata": 36,
        })  # fmt: skip
    return pd.DataFrame(rows)


def test_the_design_comparison_uses_the_decimals_rule_and_the_interval_style():
    table = _design_table([("time-series", 1.0834, 0.9912, 1.1721), ("case-crossover", 1.091, 0.97, 1.22)])
    shown = designs_side_by_side(table, style="brackets")
    assert shown["time series: RR per 10 µg/m³ (CI)"].iloc[0] == "1.08 [0.99, 1.17]"  # width 0.18: 2 decimals
    assert shown["case-crossover: RR (CI)"].iloc[0] == "1.09 [0.97, 1.22]"


def test_the_copollutant_table_uses_the_decimals_rule_and_the_p_rule():
    table = pd.DataFrame({
        "exposure": ["pm25"], "adjusted_for": [np.nan], "lag": ["0"], "per": [10.0], "rr": [1.0834],
        "rr_low": [0.9912], "rr_high": [1.1721], "p_value": [0.0499999], "correlation": [np.nan], "n_days": [900],
    })  # fmt: skip
    shown = next(b for b in copollutant_section(table).blocks if hasattr(b, "frame")).frame
    assert shown["RR per 10 µg/m³ (95% CI)"].iloc[0] == "1.08 (0.99 to 1.17)"
    assert shown["p"].iloc[0] == "<0.05"


def test_the_sensitivity_table_uses_the_decimals_rule_and_the_p_rule():
    table = pd.DataFrame({
        "check": ["main"], "setting": ["as specified"], "is_main": [True], "per": [10.0], "unit": ["µg/m³"],
        "outcome": ["deaths"], "exposure": ["pm25"], "lag": ["0"],
        "rr": [1.0834], "rr_low": [0.9912], "rr_high": [1.1721], "p_value": [0.0004], "qaic": [1234.56],
        "n_days": [1000], "n_excluded": [0], "error": [None],
    })  # fmt: skip
    section = sensitivity_section(table)
    shown = next(b for b in section.blocks if getattr(b, "name", "") == "sensitivity").frame
    rr_column = next(c for c in shown.columns if c.startswith("RR per"))
    assert shown[rr_column].iloc[0] == "1.08 (0.99 to 1.17)"  # was "1.0834 (0.9912 to 1.1721)"
    assert shown["p"].iloc[0] == "<0.001"


# --- forest plots: the unit comes from the results --------------------------------------------------------


@pytest.fixture(scope="module")
def pooled():
    rng = np.random.default_rng(3)
    estimates = pd.DataFrame({
        "city": [f"city_{i}" for i in range(6)], "coef": 5e-4 + rng.normal(0, 2e-4, 6),
        "se": rng.uniform(1e-4, 3e-4, 6),
    })  # fmt: skip
    return airhealth.pool(estimates, per=10)


def test_forest_plot_without_a_unit_asks_for_one_instead_of_writing_units(pooled):
    rows = pooled_forest_table(pooled)
    if getattr(pooled, "unit", None) is None:
        with pytest.raises(SpecificationError, match=r"no 'unit' column.*Pass xlabel, e\.g\. xlabel="):
            plot_forest(rows, pooled=pooled_summary(pooled))
        with pytest.raises(SpecificationError, match=r"cities_section cannot tell the exposure unit.*unit='µg/m³'"):
            cities_section(pooled)
    ax = plot_forest(rows.assign(unit="ppb"), pooled=pooled_summary(pooled))
    assert ax.get_xlabel() == "relative risk per 10 ppb (log scale)"
    figure = forest_figure({"o3": (rows.assign(unit="ppb"), None)})
    assert figure.axes[0].get_xlabel() == "relative risk per 10 ppb (log scale)"


def test_the_single_pool_panel_is_named_for_what_was_pooled(pooled):
    section = cities_section(pooled, unit="ppb")
    forest = next(b for b in section.blocks if getattr(b, "name", "") == "forest_cities").figure.axes[0]
    assert forest.get_title() == "all cities, RR per 10 ppb"
    assert "units" not in forest.get_xlabel() and forest.get_xlabel() == "relative risk per 10 ppb (log scale)"


# --- captions name columns by the user's labels ------------------------------------------------------------

LABELS = {"deaths_all": "All-cause deaths", "pm25": "PM2.5"}


@pytest.fixture(scope="module")
def sample() -> pd.DataFrame:
    return airhealth.load_sample()


def test_observed_fitted_caption_and_axes_use_the_labels(sample):
    from airhealth.report.plots import observed_fitted_figure

    result = airhealth.fit(sample, "deaths_all", "pm25", temperature="temperature")
    figure = observed_fitted_figure(result, labels=LABELS)
    assert figure.title == "Observed and fitted daily All-cause deaths (PM2.5, lag 0-1)"
    ax = figure.figure.axes[0]
    assert ax.get_title() == "All-cause deaths: observed and fitted" and "deaths_all" not in ax.get_ylabel()


def test_exposure_series_captions_use_the_labels(sample):
    from airhealth.report.data_quality_section import data_quality_section

    section = data_quality_section(sample, ["pm25", "deaths_all"], exposures=["pm25", "deaths_all"],
                                   count_columns=["deaths_all"], suppress_below=5, labels=LABELS)  # fmt: skip
    titles = [b.title for b in section.blocks if hasattr(b, "figure")]
    assert titles[:3] == ["PM2.5 over time", "PM2.5 by month", "All-cause deaths over time"]


def test_lag_structure_titles_use_the_labels_and_the_unit(sample):
    from airhealth.report.lag_section import lag_structure_section

    section = lag_structure_section(
        sample, "deaths_all", "pm25", single_lags=["0"], distributed=["dl0-2"], labels=LABELS, unit="µg/m³"
    )
    titles = [b.title for b in section.blocks if hasattr(b, "title")]
    assert "All-cause deaths and PM2.5: relative risk per 10 µg/m³ by lag structure" in titles
    assert "Per-lag effects of the distributed lags of PM2.5 on All-cause deaths (RR per 10 µg/m³)" in titles
    assert not any("units" in t for t in titles)


# --- Diagnostics in a notebook ------------------------------------------------------------------------------


def test_diagnostics_display_as_html_with_verdict_dispersion_and_top_autocorrelations(sample):
    data = sample.rename(columns={"deaths_all": "<b>deaths</b>"})
    diag = airhealth.diagnose(airhealth.fit(data, "<b>deaths</b>", "pm25", temperature="temperature"), max_lag=10)
    page = diag._repr_html_()
    assert "<b>deaths</b>" not in page and "&lt;b&gt;deaths&lt;/b&gt;" in page  # user text escaped
    assert f"dispersion {diag.dispersion:.2f} (Pearson χ² / residual df)" in page
    for finding in diag.verdict["finding"]:
        assert html_escape(finding, quote=False) in page  # pandas escapes & < >, not quotes
    acf = diag.autocorrelation
    top = acf.loc[acf["lag"] > 0].assign(size=lambda t: t["acf"].abs()).nlargest(3, "size")  # independent pick
    for lag, value in zip(top["lag"], top["acf"], strict=True):
        assert f"<td>{int(lag)}</td>\n      <td>{value:.3f}</td>" in page
