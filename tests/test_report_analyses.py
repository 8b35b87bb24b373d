"""The further analyses of a report's main model (report/analysis_sections.py): each section appears when
asked for and not otherwise, in the order asked, and holds exactly the numbers of the public function it
shows (``airhealth.attributable_burden``, ``compare_designs``, ``copollutant_table``, ``compare``,
``diagnose``, a fit with a modifier); small counts are suppressed in them; user text is escaped; the command
line's options and their bad values. The public functions themselves are checked against R and published
formulas in their own tests (test_burden_formula.py, test_case_crossover_against_r.py,
test_copollutant_modifier_against_r.py, test_compare_qaic.py, test_diagnostics*.py); here the reference is
each function called directly, so the report must reproduce it exactly (same code path: 1e-12 relative)."""

from __future__ import annotations

import html
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.cli.main import main
from airhealth.errors import SpecificationError
from airhealth.prep.calendar import season_column
from airhealth.report.city_report import report_content, write_report
from airhealth.report.document import Table, Text
from airhealth.simulate import simulate_city

SAME = 1e-12  # the report calls the same function on the same data: any difference is a wiring defect
WHO_PM25_24H = "who-guideline:pm2.5:24h"  # WHO 2021 AQG level, 15 µg/m³ (verified in shared/references.md)
OPTIONS = {"temperature": "temperature"}


@pytest.fixture(scope="module")
def city() -> pd.DataFrame:
    """Four invented years with a warm/cold season column."""
    tables = simulate_city(11, "2015-01-01", "2018-12-31")
    data = airhealth.align_daily(tables["counts"], tables["pollution"], tables["weather"])
    data["season"] = season_column(data["date"]).to_numpy()
    return data


def _content(city: pd.DataFrame, threshold: int | None = None, **analyses: object):
    return report_content(city, ["deaths_all"], ["pm25"], ["0-1", "dl0-3"], small_count_threshold=threshold,
                          **OPTIONS, **analyses)  # fmt: skip


def _titles(content) -> list[str]:
    return [s.title for s in content.sections]


def _table(content, name: str) -> pd.DataFrame:
    return next(b.frame for s in content.sections for b in s.blocks if isinstance(b, Table) and b.name == name)


@pytest.fixture(scope="module")
def everything(city: pd.DataFrame):
    return _content(city, burden=WHO_PM25_24H, compare_designs=True, diagnostics=True, copollutant_check=["no2"],
                    effect_modifier="season", robustness=True)  # fmt: skip


def test_no_further_section_unless_asked(city: pd.DataFrame) -> None:
    plain = _content(city)
    assert _titles(plain) == ["Analyses", "Daily health counts", "Effect estimates", "Main model",
                              "Exposure and weather data"]  # fmt: skip
    assert not any("Further analyses" in b.text for b in plain.sections[0].blocks if isinstance(b, Text))
    assert "assumes that the estimated association is causal" not in plain.caution
    off = _content(city, burden=None, diagnostics=False, copollutant_check=[])
    assert _titles(off) == _titles(plain)


def test_sections_follow_the_order_asked_before_the_data_section(everything) -> None:
    assert _titles(everything)[4:] == [
        "Attributable burden", "Time series and case-crossover", "Diagnostics of the main model",
        "Adjustment for co-pollutants", "Effect modification by season",
        "Robustness to the lag structure and the time trend", "Exposure and weather data",
    ]  # fmt: skip


def test_methods_paragraph_names_what_was_run_and_caution_covers_burden(everything) -> None:
    methods = " ".join(b.text for b in everything.sections[0].blocks if isinstance(b, Text))
    assert "Further analyses of the main model, in the order shown: the cases attributable to exposure above" in methods
    assert "time-stratified case-crossover" in methods and "QAIC" in methods
    assert f"counterfactual level ({WHO_PM25_24H})" in methods
    assert "co-pollutant in turn, on common days (no2)" in methods
    assert "test of equal effects (season)" in methods
    assert "not proof of causation" in everything.caution
    assert "assumes that the estimated association is causal and that the counterfactual level could" in (
        everything.caution
    )


def test_burden_section_holds_attributable_burden_of_the_main_model(city: pd.DataFrame, everything) -> None:
    main = everything.main
    assert (main.spec.outcome, main.spec.exposure, main.spec.lag.label) == ("deaths_all", "pm25", "0-1")
    expected = airhealth.attributable_burden(main, WHO_PM25_24H, data=city)
    total = _table(everything, "burden_total").iloc[0]
    for key in ("attributable", "attributable_low", "attributable_high", "fraction", "cases"):
        assert total[key] == pytest.approx(expected.to_dict()[key], rel=SAME)
    by_year = _table(everything, "burden_year")
    pd.testing.assert_frame_equal(by_year, expected.table("year"), check_exact=False, rtol=SAME)
    assert expected.counterfactual.value == 15  # the WHO 2021 24-hour PM2.5 guideline level


def test_design_section_holds_compare_designs(city: pd.DataFrame, everything) -> None:
    expected = airhealth.compare_designs(city, "deaths_all", "pm25", lags=["0-1"], **OPTIONS)
    shown = _table(everything, "design_comparison_tidy")
    pd.testing.assert_frame_equal(shown, expected, check_exact=False, rtol=SAME)
    assert set(shown["design"]) == {"time-series", "case-crossover"}


def test_copollutant_and_modifier_sections_hold_their_functions(city: pd.DataFrame, everything) -> None:
    expected = airhealth.copollutant_table(city, "pm25", ["no2"], "deaths_all", lag="0-1", **OPTIONS)
    shown = _table(everything, "copollutant_estimates")
    rr = shown.filter(like="RR per 10").iloc[:, 0]
    assert rr.tolist() == [f"{r:.3f} ({lo:.3f} to {hi:.3f})" for r, lo, hi in
                           expected[["rr", "rr_low", "rr_high"]].to_numpy()]  # fmt: skip
    grouped = airhealth.fit(city, "deaths_all", "pm25", lag="0-1", modifier="season", **OPTIONS)
    by_group = grouped.effects_by_group()
    shown = _table(everything, "effects_by_season")
    assert shown["season"].tolist() == by_group["group"].map(str).tolist()
    assert shown.iloc[:, 1].tolist() == [f"{r:.3f} ({lo:.3f} to {hi:.3f})" for r, lo, hi in
                                         by_group[["rr", "rr_low", "rr_high"]].to_numpy()]  # fmt: skip


def test_diagnostics_and_robustness_hold_diagnose_and_compare(city: pd.DataFrame, everything) -> None:
    checks = airhealth.diagnose(everything.main)
    pd.testing.assert_frame_equal(_table(everything, "diagnostics_verdict"), checks.verdict)
    expected = airhealth.compare(city, ["0-1", "dl0-3"], trend_df_per_year=[4.0, 7.0, 10.0], outcome="deaths_all",
                                 exposure="pm25", **OPTIONS)  # fmt: skip
    shown = _table(everything, "robustness_full")
    pd.testing.assert_frame_equal(shown, expected, check_exact=False, rtol=SAME)
    assert shown["trend_df_per_year"].tolist() == [4, 7, 10, 4, 7, 10]
    assert shown["n_days"].nunique() == 1  # common days, so that QAIC compares


def test_sensitivity_section_holds_airhealth_sensitivity(city: pd.DataFrame) -> None:
    checks = {"trend_df_per_year": [4, 10], "exclude_above_percentile": 99}
    content = _content(city, sensitivity=checks)
    assert _titles(content)[4] == "Sensitivity analyses"
    expected = airhealth.sensitivity(city, "deaths_all", "pm25", lag="0-1", checks=checks, **OPTIONS)
    shown = _table(content, "sensitivity")
    assert len(shown) == len(expected) == 4  # main, df 4, df 10, days above the 99th percentile left out
    rr = shown.filter(like="RR").iloc[:, 0].tolist()
    for text, row in zip(rr, expected.itertuples(), strict=True):
        assert f"{row.rr:.3f}" in text or f"{row.rr:.4f}" in text
    figures = [b for s in content.sections for b in s.blocks if getattr(b, "name", "") == "sensitivity"]
    assert len(figures) == 2  # the table and its figure


def test_robustness_takes_its_own_df_values(city: pd.DataFrame) -> None:
    content = _content(city, robustness=[5, 9])
    assert _table(content, "robustness_full")["trend_df_per_year"].tolist() == [5, 9, 5, 9]


def test_written_page_suppresses_small_counts_in_the_new_sections(city: pd.DataFrame, tmp_path: Path) -> None:
    # deaths 13-60 a day: with threshold 40 the yearly cases and the influential days' counts fall below it
    out = tmp_path / "r"
    write_report(city, ["deaths_all"], ["pm25"], ["0-1"], out, small_count_threshold=40, burden=WHO_PM25_24H,
                 diagnostics=True, **OPTIONS)  # fmt: skip
    year = pd.read_csv(out / "tables" / "burden_year.csv", dtype=str)
    assert (year["cases"] == "suppressed").all()  # yearly totals of days with fewer than 40 deaths
    assert (year["fraction"] == "suppressed").all()  # a fraction would give the hidden cases back
    assert pd.to_numeric(year["attributable"]).notna().all()  # estimates, not counts (docs/burden.md)
    influential = pd.read_csv(out / "tables" / "influential_days.csv", dtype=str)
    observed = pd.to_numeric(influential["observed"], errors="coerce")
    assert (observed.dropna() >= 40).all() and (influential["observed"] == "<40").any()
    page = html.unescape((out / "index.html").read_text(encoding="utf-8"))
    assert "QAIC" in page and page.count("assumes that the estimated association is causal") >= 3


def test_qaic_caveat_follows_the_robustness_table(city: pd.DataFrame, tmp_path: Path) -> None:
    from airhealth.report.html import QAIC_CAVEAT

    out = tmp_path / "r"
    write_report(city, ["deaths_all"], ["pm25"], ["0-1"], out, robustness=[4, 7], **OPTIONS)
    page = html.unescape((out / "index.html").read_text(encoding="utf-8"))
    section = page[page.index("Robustness to the lag structure and the time trend") :]
    table_at = section.index("Estimates by lag structure and df per year")
    assert QAIC_CAVEAT in section[table_at:]


def test_user_labels_are_escaped_in_the_new_sections(city: pd.DataFrame, tmp_path: Path) -> None:
    data = city.rename(columns={"no2": "no2 <i>&</i>"})
    data["season"] = data["season"].map({"warm": "warm <script>x</script>", "cold": "cold & dark"})
    out = tmp_path / "r"
    write_report(data, ["deaths_all"], ["pm25"], ["0-1"], out, copollutant_check="no2 <i>&</i>",
                 effect_modifier="season", **OPTIONS)  # fmt: skip
    page = (out / "index.html").read_text(encoding="utf-8")
    assert "<script>x" not in page and "<i>&" not in page
    assert "no2 &lt;i&gt;&amp;&lt;/i&gt;" in page and "warm &lt;script&gt;x&lt;/script&gt;" in page


@pytest.mark.parametrize(
    ("options", "message"),
    [
        ({"burden": "who-guideline:pm9:24h"}, "burden 'who-guideline:pm9:24h': preset scheme 'who-guideline' has no"),
        ({"burden": True}, "burden takes a counterfactual level in the exposure's unit or a preset name"),
        ({"copollutant_check": ["nox"]}, "copollutant_check 'nox': the data have no column 'nox'"),
        ({"effect_modifier": "age"}, "effect_modifier 'age': the data have no column 'age'"),
        ({"diagnostics": "yes"}, "diagnostics takes True (or False), got 'yes'"),
        ({"sensitivity": [4, 10]}, "sensitivity takes True (the default checks) or a mapping of checks"),
    ],
)
def test_bad_analysis_values_are_refused_before_fitting(city: pd.DataFrame, tmp_path: Path, options, message) -> None:
    with pytest.raises(SpecificationError) as caught:
        write_report(city, ["deaths_all"], ["pm25"], ["0-1"], tmp_path / "r", **OPTIONS, **options)
    assert message in str(caught.value)
    assert not (tmp_path / "r").exists()


# -- the command line ------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def city_csv(city: pd.DataFrame, tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("analyses") / "city.csv"
    city.to_csv(path, index=False, date_format="%Y-%m-%d")
    return path


def _headings(out: Path) -> list[str]:
    import re

    return [html.unescape(h) for h in re.findall(r"<h2[^>]*>(.*?)</h2>", (out / "index.html").read_text())]


def test_cli_sections_follow_the_command_line_order(city_csv: Path, tmp_path: Path) -> None:
    out = tmp_path / "r"
    code = main(["report", str(city_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--temperature",
                 "temperature", "--out", str(out), "--compare-designs", "--burden", "15", "--copollutant", "no2",
                 "--modifier", "season", "--diagnostics", "--sensitivity"])  # fmt: skip
    assert code == 0
    assert _headings(out)[4:10] == ["Time series and case-crossover", "Attributable burden",
                                   "Adjustment for co-pollutants", "Effect modification by season",
                                   "Diagnostics of the main model", "Sensitivity analyses"]  # fmt: skip
    total = pd.read_csv(out / "tables" / "burden_total.csv")
    main_fit = airhealth.fit(pd.read_csv(city_csv), "deaths_all", "pm25", lag="0-1", temperature="temperature")
    data = pd.read_csv(city_csv, parse_dates=["date"])
    expected = airhealth.attributable_burden(main_fit, 15.0, data=data).to_dict()["attributable"]
    assert total["attributable"].iloc[0] == pytest.approx(expected, rel=1e-9)  # CSV keeps full precision


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["--burden", "who:pm25"], "--burden 'who:pm25': counterfactual 'who:pm25' is neither a number nor a preset"),
        (["--modifier", "age"], "--modifier 'age': the data have no column 'age'"),
        (["--copollutant", "nox"], "column 'nox' does not exist in city.csv"),
    ],
)
def test_cli_bad_analysis_options_exit_2_with_one_line(city_csv: Path, tmp_path: Path, capsys, argv, message) -> None:
    code = main(["report", str(city_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--out",
                 str(tmp_path / "r"), *argv])  # fmt: skip
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and message in err and err.startswith("airhealth report: error: ")


# -- many cities: airhealth pool --report ----------------------------------------------------------------


@pytest.fixture(scope="module")
def estimates_csv(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = tmp_path_factory.mktemp("cities")
    out = folder / "estimates.csv"
    sample = Path(__file__).resolve().parents[1] / "sample_data" / "cities"
    code = main(["fit-cities", str(sample), "--outcome", "deaths", "--exposure", "pm25", "--lag", "dl0-3",
                 "--temperature", "temperature", "--executor", "serial", "--quiet", "--out", str(out)])  # fmt: skip
    assert code == 0
    return out


def test_pool_report_holds_the_pool_forest_and_pooled_lag_curve(estimates_csv: Path, tmp_path: Path) -> None:
    from airhealth.cities.estimates_table import unflatten
    from airhealth.report.pooled_lag_plot import pooled_lag_curve

    out = tmp_path / "pooled"
    assert main(["pool", str(estimates_csv), "--report", str(out)]) == 0
    assert sorted(p.name for p in (out / "figures").glob("*.png")) == ["forest_cities.png", "pooled_lag_curve.png"]
    frame = pd.read_csv(estimates_csv)
    kept = frame[frame["error"].isna()]
    pooled = airhealth.pool(kept, estimate="coef", se="se")
    shown = pd.read_csv(out / "tables" / "pooled_estimates.csv")
    assert shown["rr"].iloc[0] == pytest.approx(pooled.to_dict()["rr"], rel=SAME)
    with pytest.warns(airhealth.DataWarning, match="Thistleton"):
        coefs, covs = airhealth.cities.lag_vectors(unflatten(frame))
    curve = pooled_lag_curve(airhealth.pool_multivariate(coefs, covs), np.eye(4), [0, 1, 2, 3])
    pd.testing.assert_frame_equal(pd.read_csv(out / "tables" / "pooled_lag_curve.csv"), curve, rtol=SAME)
    page = html.unescape((out / "index.html").read_text(encoding="utf-8"))
    assert "Many cities: deaths and pm25" in page and "Cities left out because their fit failed: Thistleton" in page


def test_pool_report_without_lag_vectors_has_no_lag_curve(estimates_csv: Path, tmp_path: Path) -> None:
    flat = pd.read_csv(estimates_csv)
    plain = tmp_path / "plain.csv"
    flat.drop(columns=[c for c in flat.columns if c.startswith("basis_")]).to_csv(plain, index=False)
    out = tmp_path / "pooled"
    assert main(["pool", str(plain), "--report", str(out)]) == 0
    assert [p.name for p in (out / "figures").glob("*.png")] == ["forest_cities.png"]


def test_pool_report_into_a_file_exits_2(estimates_csv: Path, tmp_path: Path, capsys) -> None:
    target = tmp_path / "taken.txt"
    target.write_text("x")
    assert main(["pool", str(estimates_csv), "--report", str(target)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "the report goes into a folder, but" in err and "taken.txt" in err


def test_an_analysis_failing_on_the_data_is_reported_and_the_rest_completes(city: pd.DataFrame) -> None:
    # a robustness lag of 1450 days leaves too few usable days (a DataError), which
    # before stopped the whole report with no page written
    with pytest.warns(airhealth.DataWarning, match="The analysis 'robustness' could not be completed: too few"):
        content = report_content(city, ["deaths_all"], ["pm25"], ["0-1", "0-1450"], robustness=True,
                                 burden=WHO_PM25_24H, **OPTIONS)  # fmt: skip
    titles = _titles(content)
    assert "Not completed: robustness" in titles and "Attributable burden" in titles
    failed = next(s for s in content.sections if s.title == "Not completed: robustness")
    texts = " ".join(b.text for b in failed.blocks if isinstance(b, Text))
    assert "(deaths_all, pm25, lag 0-1)" in texts and "too few usable days" in texts
