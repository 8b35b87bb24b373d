"""The report's tables in every format, with the user's labels, units and per-IQR estimates.

References: the IQR is numpy's percentile with linear interpolation (Hyndman & Fan 1996, definition 7,
R's default ``quantile`` type) of the exposure on the days the model used; an RR per IQR is
exp(beta * IQR) = RR_per ** (IQR / per), and its interval bounds follow the same identity (a Wald interval
on the log scale, scaled). The reference fit is :func:`airhealth.fit`, checked against R elsewhere.
"""

from __future__ import annotations

import html
import re
from pathlib import Path

import docx
import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.cli.main import main
from airhealth.report.numbers import format_rr
from airhealth.simulate import simulate_city

LABELS = {"deaths_all": "All-cause deaths <all> & 100%", "o3": "Ozone (8-h)"}
FORMATS = ("csv", "md", "html", "tex", "docx")


@pytest.fixture(scope="module")
def city() -> pd.DataFrame:
    tables = simulate_city(21, "2015-01-01", "2016-12-31")
    return airhealth.align_daily(tables["counts"], tables["pollution"], tables["weather"])


@pytest.fixture(scope="module")
def report(city: pd.DataFrame, tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("tables") / "report"
    airhealth.write_report(
        city, outcomes=["deaths_all"], exposures=["pm25", "o3"], lags=["0", "0-1"], out=out,
        units={"o3": "ppb"}, temperature="temperature", labels=LABELS, table_formats="csv,md,html,tex,docx",
        small_count_threshold=20,
    )  # fmt: skip
    return out


def test_every_report_table_is_written_in_every_format_asked_for(report: Path) -> None:
    tables = report / "tables"
    stems = {p.stem for p in tables.iterdir()}
    assert {"effects", "effects_full", "daily_counts", "dropped_days"} <= stems
    for stem in stems:
        assert {f"{stem}.{f}" for f in FORMATS} <= {p.name for p in tables.iterdir()}, stem


def test_labels_are_shown_in_tables_page_and_figures_while_the_data_keep_the_names(report: Path) -> None:
    full = pd.read_csv(report / "tables" / "effects_full.csv")
    assert set(full["outcome"]) == {"deaths_all"} and set(full["exposure"]) == {"pm25", "o3"}
    md = (report / "tables" / "effects.md").read_text(encoding="utf-8")
    assert "| All-cause deaths \\<all> &amp; 100% | Ozone (8-h) |" in md  # "<" backslash-escaped, "&" an entity
    page = html.unescape((report / "index.html").read_text(encoding="utf-8"))
    assert "All-cause deaths <all> & 100%: relative risks per" in page  # the forest figure's caption
    raw = (report / "index.html").read_text(encoding="utf-8")
    assert "All-cause deaths &lt;all&gt; &amp; 100%" in raw and "<all>" not in raw
    tex = (report / "tables" / "effects.tex").read_text(encoding="utf-8")
    assert r"All-cause deaths \textless{}all\textgreater{} \& 100\%" in tex  # no bare < > (OT1: ¡ ¿)


def test_units_and_per_iqr_estimates_stand_beside_the_per_10_estimates(report: Path, city: pd.DataFrame) -> None:
    full = pd.read_csv(report / "tables" / "effects_full.csv", dtype={"lag": str})
    row = full[(full.exposure == "o3") & (full.lag == "0")].iloc[0]
    single = airhealth.fit(city, "deaths_all", "o3", lag="0", temperature="temperature", unit="ppb")
    used = city.set_index(pd.to_datetime(city["date"])).loc[single.observed.index, "o3"]
    q1, q3 = np.percentile(used, [25, 75])  # Hyndman & Fan definition 7
    assert row["exposure_iqr"] == pytest.approx(q3 - q1, rel=1e-12)
    scale = row["exposure_iqr"] / row["per"]
    for iqr_col, per_col in (("rr_iqr", "rr"), ("rr_iqr_low", "rr_low"), ("rr_iqr_high", "rr_high")):
        assert row[iqr_col] == pytest.approx(row[per_col] ** scale, rel=1e-10), iqr_col  # rounding only
    shown = pd.read_csv(report / "tables" / "effects.csv", dtype={"lag": str})
    o3 = shown[(shown.exposure == "Ozone (8-h)") & (shown.lag == "0")].iloc[0]
    assert o3["per"] == "10 ppb" and o3["IQR"].endswith(" ppb")
    assert o3["RR per IQR (95% CI)"] == format_rr(
        row.rr_iqr, row.rr_iqr_low, row.rr_iqr_high, len(o3["RR per IQR (95% CI)"].split(" ")[0].split(".")[1])
    )
    notes = (report / "tables" / "effects.md").read_text(encoding="utf-8")
    assert "IQR: interquartile range of the exposure on the days each model used" in notes


def test_suppressed_counts_read_the_same_in_every_format(report: Path) -> None:
    counts = pd.read_csv(report / "tables" / "daily_counts.csv", dtype=str, keep_default_na=False)
    document = docx.Document(str(report / "tables" / "daily_counts.docx")).tables[0]
    words = [c.text for c in document.rows[0].cells]
    row = {w: c.text for w, c in zip(words, document.rows[1].cells, strict=True)}
    assert counts["min"].iloc[0] == "<20" == row["Minimum"]  # the fewest simulated daily deaths is 15
    assert row["Outcome"] == "All-cause deaths <all> & 100%"
    md = [line for line in (report / "tables" / "daily_counts.md").read_text("utf-8").splitlines() if "|" in line]
    unescaped = [html.unescape(re.sub(r"\\(.)", r"\1", c.strip())) for c in md[2].split(" | ")]  # CommonMark
    assert [unescaped[0].removeprefix("| "), *unescaped[1:-1], unescaped[-1].removesuffix(" |")] == [
        c.text for c in document.rows[1].cells
    ]


def test_a_report_with_more_formats_replaces_an_earlier_one(city: pd.DataFrame, report: Path) -> None:
    airhealth.write_report(
        city, outcomes=["deaths_all"], exposures=["pm25"], lags=["0"], out=report, temperature="temperature",
    )  # fmt: skip  # the folder holds .md/.tex/.docx tables written by airhealth: not refused
    assert {p.suffix for p in (report / "tables").iterdir()} == {".csv"}


def test_bad_labels_and_formats_are_refused_before_fitting(city: pd.DataFrame, tmp_path: Path) -> None:
    with pytest.raises(airhealth.SpecificationError, match=r"labels\['deaths_all'\] = ''"):
        airhealth.write_report(city, ["deaths_all"], ["pm25"], ["0"], tmp_path / "a", labels={"deaths_all": ""})
    with pytest.raises(airhealth.SpecificationError, match=r"table format='pdf'"):
        airhealth.write_report(city, ["deaths_all"], ["pm25"], ["0"], tmp_path / "b", table_formats="csv,pdf")
    assert not (tmp_path / "a").exists() and not (tmp_path / "b").exists()


# -- command line ------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def city_csv(city: pd.DataFrame, tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("tables_cli") / "city.csv"
    city.to_csv(path, index=False, date_format="%Y-%m-%d")
    return path


def test_cli_writes_the_table_formats_with_labels(city_csv: Path, tmp_path: Path, capsys) -> None:
    out = tmp_path / "r"
    code = main([
        "report", str(city_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--lags", "0",
        "--temperature", "temperature", "--out", str(out), "--table-formats", "csv,md,tex,docx",
        "--label", "deaths_all=All-cause deaths", "--label", "pm25='PM2.5'",
    ])  # fmt: skip
    assert code == 0
    assert {p.suffix for p in (out / "tables").glob("effects.*")} == {".csv", ".md", ".tex", ".docx"}
    assert "| All-cause deaths | PM2.5 |" in (out / "tables" / "effects.md").read_text(encoding="utf-8")
    assert "All-cause deaths" in capsys.readouterr().out


@pytest.mark.parametrize(
    ("option", "message"),
    [
        (["--table-formats", "csv,xls"], "table format='xls' is not a valid choice"),
        (["--label", "deaths_all"], "--label 'deaths_all': write NAME=TEXT"),
        (["--label", "a=x", "--label", "a=y"], "display name of 'a' twice"),
    ],
)
def test_cli_refuses_bad_table_options_with_the_fix(city_csv, tmp_path, capsys, option, message) -> None:
    code = main([
        "report", str(city_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--lags", "0",
        "--out", str(tmp_path / "r"), *option,
    ])  # fmt: skip
    assert code == 2 and message in capsys.readouterr().err
    assert not (tmp_path / "r").exists()


def test_cli_fit_prints_the_display_names(city_csv: Path, capsys) -> None:
    code = main([
        "fit", str(city_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--lag", "0",
        "--label", "deaths_all=All-cause deaths", "--label", "pm25=PM2.5",
    ])  # fmt: skip
    assert code == 0 and capsys.readouterr().out.startswith("All-cause deaths and PM2.5:")


def test_no_number_in_any_shown_table_is_in_scientific_notation(report: Path) -> None:
    exponent = re.compile(r"\d[eE][+-]?\d")
    for path in (report / "tables").glob("*.md"):
        assert not exponent.search(path.read_text(encoding="utf-8")), path.name
    for path in (report / "tables").glob("*.docx"):
        cells = [c.text for t in docx.Document(str(path)).tables for row in t.rows for c in row.cells]
        assert not [c for c in cells if exponent.search(c)], path.name
    page_tables = re.findall(r"<table.*?</table>", (report / "index.html").read_text("utf-8"), flags=re.S)
    assert page_tables and not [t for t in page_tables if exponent.search(t)]


def test_the_page_explains_every_abbreviation_its_tables_use(report: Path) -> None:
    page = html.unescape((report / "index.html").read_text(encoding="utf-8"))
    for needed in ("SD: standard deviation.", "QAIC: quasi-Akaike information criterion", "RR: relative risk",
                   "IQR: interquartile range", "'0-1' the mean over lags 0 to 1"):  # fmt: skip
        assert needed in page
    # figures explain their own codes in the note after each figure
    tables_part = re.sub(r"<figure.*?</figure>(<p class='note'>.*?</p>)?", "", page, flags=re.S)
    assert tables_part.count("RR: relative risk") == 1  # once under the effects table, not repeated in its note


def test_qaic_is_left_empty_for_models_fitted_on_different_days() -> None:
    """QAIC compares models on the same days only (Peng, Dominici & Louis 2006): the effects table does not put
    QAIC side by side for lags that used different days, and keeps it when they share the days."""
    import warnings

    import airhealth
    from airhealth.report.tables import effects_table
    from airhealth.studies.compare import compare_results

    data = airhealth.load_sample().iloc[:1500]
    options = dict(outcome="deaths_all", exposure="pm25", temperature="temperature")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        own = effects_table(compare_results(data, ["0", "dl0-5"], **options))
        common = effects_table(compare_results(data, ["0", "dl0-5"], common_days=True, **options))
    assert own["n_days"].nunique() == 2 and own["qaic"].isna().all()
    assert common["n_days"].nunique() == 1 and common["qaic"].notna().all()
