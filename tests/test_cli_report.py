"""``airhealth report`` and ``airhealth.write_report``: only what was asked for, failures inside the report.

Small invented data (three simulated years) keep these end-to-end runs fast. The reference for every
number in the report is the single fit, :func:`airhealth.fit`, itself checked against R elsewhere.
"""

from __future__ import annotations

import html
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.cli.main import main
from airhealth.errors import DataError, SpecificationError
from airhealth.simulate import simulate_city

# compare_results and a single fit reach the same IRLS fixed point by different paths; they agree to ~1e-12
# (see tests/test_compare.py); 1e-9 leaves room for the convergence tolerance (1e-10 relative deviance).
SAME_FIT = 1e-9


@pytest.fixture(scope="module")
def city() -> pd.DataFrame:
    """Three invented years; ``broken`` is never measured, ``pm10`` is measured every other day only."""
    tables = simulate_city(11, "2015-01-01", "2017-12-31")
    data = airhealth.align_daily(tables["counts"], tables["pollution"], tables["weather"])
    data["broken"] = np.nan
    data.loc[data.index % 2 != 0, "pm10"] = np.nan
    return data


@pytest.fixture(scope="module")
def city_csv(city: pd.DataFrame, tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("report") / "city.csv"
    city.to_csv(path, index=False, date_format="%Y-%m-%d")
    return path


@pytest.fixture(scope="module")
def report_dir(city_csv: Path, tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("report") / "out"
    code = main([
        "report", str(city_csv), "--outcome", "deaths_all", "--outcome", "admissions_respiratory",
        "--exposure", "pm25", "--exposure", "o3", "--exposure", "broken", "--exposure", "pm10",
        "--temperature", "temperature", "--lags", "0,2,0-1,dl0-3", "--main-lag", "0-1", "--unit", "o3=ppb",
        "--per", "5", "--out", str(out),
    ])  # fmt: skip
    assert code == 0
    return out


def _page(out: Path) -> str:
    """The page's text with HTML entities decoded (how each writer escapes quotes is its own business)."""
    return html.unescape((out / "index.html").read_text(encoding="utf-8"))


def test_report_holds_exactly_the_requested_outcomes_exposures_and_lags(report_dir: Path) -> None:
    table = pd.read_csv(report_dir / "tables" / "effects_full.csv", dtype={"lag": str})
    assert set(table["outcome"]) == {"deaths_all", "admissions_respiratory"}
    assert set(table["exposure"]) == {"pm25", "o3", "pm10"}  # 'broken' failed: listed apart, below
    assert set(table["lag"]) == {"0", "2", "0-1", "dl0-3"}
    complete = table[table["exposure"] != "pm10"]
    assert len(complete) == 2 * 2 * 4
    # pm10 every other day: the single days (0 and 2) fit, the windows needing consecutive days do not
    assert set(table.loc[table["exposure"] == "pm10", "lag"]) == {"0", "2"}
    assert (table["per"] == 5).all()


def test_failing_exposure_is_listed_in_the_report_with_its_message(report_dir: Path) -> None:
    failed = pd.read_csv(report_dir / "tables" / "failed_analyses.csv", dtype={"lag": str})
    broken = failed[failed["exposure"] == "broken"]
    assert set(broken["outcome"]) == {"deaths_all", "admissions_respiratory"}
    assert (broken["lag"] == "all").all()
    assert broken["error"].str.contains("exposure column 'broken' is entirely missing").all()
    pm10 = failed[failed["exposure"] == "pm10"]
    assert set(pm10["lag"]) == {"0-1", "dl0-3"}
    assert pm10["error"].str.contains("too few usable days").all()
    page = _page(report_dir)
    assert "Analyses that could not be completed" in page
    assert "exposure column 'broken' is entirely missing" in page


def test_main_model_is_the_named_lag(report_dir: Path, city: pd.DataFrame) -> None:
    page = _page(report_dir)
    assert "The main model is deaths_all, pm25 (µg/m³), lag 0-1." in page
    assert "Observed and fitted daily deaths_all (pm25, lag 0-1)" in page  # the figure of the main model
    dropped = pd.read_csv(report_dir / "tables" / "dropped_days.csv").set_index("reason")["days"]
    single = airhealth.fit(city, outcome="deaths_all", exposure="pm25", lag="0-1", temperature="temperature")
    assert dropped.to_dict() == single.drop_summary().to_dict()


def test_units_reach_tables_labels_and_figures(report_dir: Path) -> None:
    table = pd.read_csv(report_dir / "tables" / "effects_full.csv")
    units = table.groupby("exposure")["unit"].unique().map(list).to_dict()
    assert units == {"pm25": ["µg/m³"], "o3": ["ppb"], "pm10": ["µg/m³"]}
    shown = pd.read_csv(report_dir / "tables" / "effects.csv")
    assert set(shown.loc[shown["exposure"] == "o3", "per"]) == {"5 ppb"}
    assert set(shown.loc[shown["exposure"] == "pm25", "per"]) == {"5 µg/m³"}
    page = _page(report_dir)
    assert "o3 (ppb)" in page and "pm25 (µg/m³)" in page
    assert "relative risk per 5 µg/m³ at each lag, dl0-3" in page  # the main exposure's lag-response figure


def test_report_numbers_equal_the_single_fit(report_dir: Path, city: pd.DataFrame) -> None:
    table = pd.read_csv(report_dir / "tables" / "effects_full.csv", dtype={"lag": str})
    row = table[(table.outcome == "admissions_respiratory") & (table.exposure == "o3") & (table.lag == "dl0-3")]
    single = airhealth.fit(
        city, outcome="admissions_respiratory", exposure="o3", lag="dl0-3", temperature="temperature", unit="ppb"
    ).to_dict(per=5)
    for key in ("coef", "se", "rr", "rr_low", "rr_high"):
        assert row[key].iloc[0] == pytest.approx(single[key], rel=SAME_FIT), key
    assert row["n_days"].iloc[0] == single["n_days"]
    # the lags of o3 used different days, so their QAIC is not comparable and is left empty
    assert table.loc[(table.outcome == "admissions_respiratory") & (table.exposure == "o3"), "n_days"].nunique() > 1
    assert pd.isna(row["qaic"].iloc[0])


def test_report_files_are_written(report_dir: Path) -> None:
    pngs = {p.name for p in (report_dir / "figures").glob("*.png")}
    assert {"effects_forest_deaths_all.png", "effects_forest_admissions_respiratory.png", "observed_fitted.png"} <= pngs
    assert "lag_response_dl0_3.png" in pngs
    assert "not proof of causation" in _page(report_dir)


def test_write_report_in_python_matches_and_leaves_the_data_alone(city: pd.DataFrame, tmp_path: Path) -> None:
    before = city.copy(deep=True)
    path = airhealth.write_report(
        city, outcomes=["deaths_all"], exposures=["o3", "no2"], lags=["1", "0-2"], out=tmp_path / "r",
        main_lag="1", units={"o3": "ppb"}, per=10, small_count_threshold=3, temperature="temperature", level=0.9,
    )  # fmt: skip
    pd.testing.assert_frame_equal(city, before)
    assert path == tmp_path / "r" / "index.html"
    table = pd.read_csv(tmp_path / "r" / "tables" / "effects_full.csv", dtype={"lag": str})
    assert list(zip(table["exposure"], table["lag"], strict=True)) == [
        ("o3", "1"),
        ("o3", "0-2"),
        ("no2", "1"),
        ("no2", "0-2"),
    ]
    single = airhealth.fit(city, outcome="deaths_all", exposure="o3", lag="1", temperature="temperature")
    assert table.loc[0, "rr_low"] == pytest.approx(single.effect(per=10, level=0.9).rr_low, rel=SAME_FIT)
    page = _page(path.parent)
    assert "The main model is deaths_all, o3 (ppb), lag 1." in page
    assert "RR (90% CI)" in page and "Counts below 3 are suppressed" in page


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"main_lag": "0-3"}, r"main lag '0-3' is not among the lags asked for \(0, 0-1\)"),
        ({"units": {"pm10": "ppb"}}, r"unit is given for 'pm10', which is not one of the exposures \(pm25\)"),
        ({"lags": ["0", "0-1", "0"]}, r"lag '0' is given twice"),
        ({"lags": ["0", "soon"]}, r"lag 'soon' is not understood"),
        ({"outcomes": ["deaths_all", "pm25"]}, r"'pm25' is given both as an outcome and as an exposure"),
        ({"per": 0}, r"per must be a positive number"),
        ({"small_count_threshold": 0}, r"small_count_threshold must be a whole number >= 1"),
    ],
)
def test_bad_report_arguments_are_named(city: pd.DataFrame, tmp_path: Path, kwargs: dict, message: str) -> None:
    args = {"outcomes": ["deaths_all"], "exposures": ["pm25"], "lags": ["0", "0-1"], "out": tmp_path / "r"}
    with pytest.raises(SpecificationError, match=message):
        airhealth.write_report(city, **{**args, **kwargs})
    assert not (tmp_path / "r").exists()


def test_missing_column_stops_before_any_fit(city: pd.DataFrame, tmp_path: Path) -> None:
    with pytest.raises(DataError, match=r"column 'pm2_5' does not exist in data"):
        airhealth.write_report(city, outcomes=["deaths_all"], exposures=["pm2_5"], lags=["0"], out=tmp_path / "r")


def test_nothing_fitted_is_an_error_listing_each_failure(city: pd.DataFrame, tmp_path: Path) -> None:
    with pytest.raises(DataError, match=r"no analysis could be completed.*deaths_all and broken: exposure column"):
        airhealth.write_report(city, outcomes=["deaths_all"], exposures=["broken"], lags=["0"], out=tmp_path / "r")
    assert not (tmp_path / "r").exists()


def test_report_cli_prints_failures_and_exits_zero(city_csv: Path, tmp_path: Path, capsys) -> None:
    code = main(["report", str(city_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--exposure", "broken",
                 "--lags", "0", "--out", str(tmp_path / "r")])  # fmt: skip
    captured = capsys.readouterr()
    assert code == 0
    assert "could not fit deaths_all and broken (lag all): exposure column 'broken' is entirely missing" in captured.err
    assert f"report written to {tmp_path / 'r' / 'index.html'}" in captured.out


def test_report_cli_bad_main_lag_exit_code_2(city_csv: Path, tmp_path: Path, capsys) -> None:
    code = main(["report", str(city_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--lags", "0,1",
                 "--main-lag", "2", "--out", str(tmp_path / "r")])  # fmt: skip
    assert code == 2
    assert "main lag '2' is not among the lags asked for (0, 1)" in capsys.readouterr().err


def test_fit_json_carries_the_unit(city_csv: Path, capsys) -> None:
    code = main(["fit", str(city_csv), "--outcome", "deaths_all", "--exposure", "o3", "--unit", "o3=ppb", "--json"])
    assert code == 0
    record = json.loads(capsys.readouterr().out)
    assert record["unit"] == "ppb"
    main(["fit", str(city_csv), "--outcome", "deaths_all", "--exposure", "o3", "--unit", "ppb"])
    assert "RR per 10 ppb" in capsys.readouterr().out


def test_failed_main_model_is_replaced_and_said_so(city: pd.DataFrame, tmp_path: Path) -> None:
    path = airhealth.write_report(
        city, outcomes=["deaths_all"], exposures=["broken", "pm25"], lags=["0", "1"], out=tmp_path / "r", main_lag="1"
    )
    page = _page(path.parent)
    assert (
        "The main model asked for (deaths_all, broken, lag 1) could not be fitted (see 'Analyses that could not be "
        "completed'); the model checks below show deaths_all, pm25, lag 1 instead." in page
    )


def test_units_reach_the_figure_axes(city: pd.DataFrame) -> None:
    from airhealth.report.city_report import report_content
    from airhealth.report.document import Figure

    content = report_content(
        city, ["deaths_all"], ["pm25", "o3"], ["0", "dl0-2"], units={"o3": "ppb"}, per=5, level=0.9,
        temperature="temperature",
    )  # fmt: skip
    figures = {b.name: b.figure.axes[0] for s in content.sections for b in s.blocks if isinstance(b, Figure)}
    forest = figures["effects_forest_deaths_all"]
    assert forest.get_xlabel() == "relative risk per 5 units (90% CI)"
    labels = [t.get_text() for t in forest.get_yticklabels()]
    assert "o3 · lag 0 (per 5 ppb)" in labels and "pm25 · lag dl0-2 (per 5 µg/m³)" in labels
    assert figures["series_o3"].get_ylabel() == "o3 (ppb)"
    assert figures["season_pm25"].get_ylabel() == "pm25 (µg/m³)"
    assert figures["lag_response_dl0_2"].get_ylabel() == "RR per 5 µg/m³"


def test_aliased_columns_and_notes_of_the_main_model_are_shown(city: pd.DataFrame) -> None:
    from airhealth.report.city_report import _main_blocks
    from airhealth.report.document import Text

    result = airhealth.fit(city, outcome="deaths_all", exposure="pm25", lag="0")
    assert not [b for b in _main_blocks(result, "") if isinstance(b, Text) and "aliased" in b.text]
    cls, args = result.__reduce__()  # rebuilt through the constructor, whose last two arguments these are
    shown = cls(*args[:-2], ("spline(time)12", "spline(time)13"), ("fell back to Poisson",))
    texts = [b.text for b in _main_blocks(shown, "", None, [shown]) if isinstance(b, Text)]
    assert any("dropped (aliased), as R's glm does: spline(time)12, spline(time)13." in t for t in texts)
    assert "Note (deaths_all ~ pm25): fell back to Poisson" in texts


def test_warnings_are_listed_in_the_report(city: pd.DataFrame, tmp_path: Path) -> None:
    gapped = city.drop(index=range(400, 410))  # ten days absent from the file: a calendar gap
    with pytest.warns(airhealth.DataWarning, match="deaths_all and pm25: .*2016-02-05"):
        path = airhealth.write_report(
            gapped, outcomes=["deaths_all"], exposures=["pm25"], lags=["0"], out=tmp_path / "r"
        )
    warned = pd.read_csv(path.parent / "tables" / "warnings.csv")
    assert warned["warning"].str.contains("2016-02-05").any()
    assert "Warnings raised while fitting" in _page(path.parent)


def test_report_reads_with_the_shared_options(city: pd.DataFrame, tmp_path: Path) -> None:
    coded = city.assign(date=city["date"].dt.strftime("%d/%m/%Y"))
    coded.loc[[400, 401], "o3"] = -999  # in 2016
    path = tmp_path / "coded.csv"
    coded.to_csv(path, index=False, sep=";")
    out = tmp_path / "r"
    code = main(["report", str(path), "--sep", ";", "--date-format", "%d/%m/%Y", "--na-values", "-999",
                 "--start", "2016-01-01", "--end", "2016-12-31", "--outcome", "deaths_all", "--exposure", "o3",
                 "--lags", "0", "--confidence", "90", "--out", str(out)])  # fmt: skip
    assert code == 0
    counts = pd.read_csv(out / "tables" / "daily_counts.csv")
    assert counts["days"].tolist() == [366]  # 2016 only
    clean = city.assign(o3=city["o3"].where(~city.index.isin([400, 401])))
    year = clean[(clean["date"] >= "2016-01-01") & (clean["date"] <= "2016-12-31")]
    expected = airhealth.fit(year, outcome="deaths_all", exposure="o3", lag="0").to_dict(level=0.9)
    table = pd.read_csv(out / "tables" / "effects_full.csv")
    assert table["rr_low"].iloc[0] == pytest.approx(expected["rr_low"], rel=SAME_FIT)
    assert table["n_days"].iloc[0] == expected["n_days"]


@pytest.mark.parametrize(
    ("extra", "message"),
    [
        (["--lags", ","], "--lags ',' names no lag structure; give e.g. --lags 0,1,0-1,dl0-5"),
        (["--lags", "0,soon"], "lag 'soon' is not understood"),
        (["--unit", "ppb", "--exposure", "o3"], "--unit 'ppb': with several exposures write COL=UNIT"),
        (["--suppress-below", "0"], "--suppress-below must be a whole number >= 1, got 0"),
        (["--outcome", "deaths"], "column 'deaths' does not exist in city.csv"),
        (["--lags", "1", "--min-count", "2"], "--min-count applies to moving-average lags"),
    ],
)
def test_report_cli_usage_errors_name_the_option(city_csv: Path, tmp_path: Path, capsys, extra, message) -> None:
    args = ["report", str(city_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--out", str(tmp_path / "r")]
    assert main([*args, *extra]) == 2
    assert message in capsys.readouterr().err
    assert not (tmp_path / "r").exists()


def test_report_output_that_is_a_file_is_refused_before_fitting(city_csv: Path, tmp_path: Path, capsys) -> None:
    target = tmp_path / "report.html"
    target.write_text("mine", encoding="utf-8")
    assert main(["report", str(city_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--out", str(target)]) == 2
    assert f"the report goes into a folder, but {str(target)!r} is a file" in capsys.readouterr().err
    assert target.read_text(encoding="utf-8") == "mine"


def test_bad_model_options_stop_the_report_before_any_fit(city: pd.DataFrame, tmp_path: Path) -> None:
    args = {"outcomes": ["deaths_all"], "exposures": ["pm25", "temperature"], "lags": ["0"], "out": tmp_path / "r"}
    with pytest.raises(SpecificationError, match=r"unknown model option 'temprature'"):
        airhealth.write_report(city, temprature="temperature", **args)
    with pytest.raises(SpecificationError, match=r"column 'temperature' is both the exposure and the temperature"):
        airhealth.write_report(city, temperature="temperature", **args)
    assert not (tmp_path / "r").exists()
