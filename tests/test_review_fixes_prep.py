"""Review findings on data preparation, file output and the fit/daily commands: each fixed behaviour.

All data are invented (the fictional city of Norhaven) or the package's Norhaven sample; expected values are
computed here by hand or with pandas/numpy, so no outside reference is involved.
"""

from __future__ import annotations

import ast
import inspect
import textwrap
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth._io import write_text, write_with
from airhealth._warn import warn_user
from airhealth.cli.main import main
from airhealth.errors import AirhealthWarning, DataError, DataWarning
from airhealth.prep.align import align_daily, prepare_daily
from airhealth.prep.hourly import aggregate_daily, daily_statistic
from airhealth.prep.hourly_input import clean_hourly
from airhealth.prep.monitors import monitor_agreement
from airhealth.prep.validate import parse_dates, require_columns

THIS_FILE = str(Path(__file__).resolve())


@pytest.fixture(scope="module")
def two_years() -> pd.DataFrame:
    return airhealth.load_sample().iloc[:730].reset_index(drop=True)


# --- 1. dates with UTC offsets -------------------------------------------------------------------------


def test_offsets_changing_at_dst_give_the_local_dates_written():
    local = pd.date_range("2010-03-25", periods=6, freq="D", tz="Europe/Oslo")  # DST starts 28 March 2010
    text = pd.Series(local).astype(str)  # '2010-03-25 00:00:00+01:00', ..., '2010-03-30 00:00:00+02:00'
    assert text.str[-6:].nunique() == 2  # the offset really changes
    parsed = parse_dates(pd.DataFrame({"date": text}), "date")
    assert list(parsed) == list(pd.date_range("2010-03-25", periods=6, freq="D"))
    # the same with ISO 'T' and a 'Z' (UTC) suffix, and with datetime objects of different offsets
    assert list(parse_dates(pd.DataFrame({"date": ["2010-01-01T00:00:00Z", "2010-01-02T00:00Z"]}), "date")) == [
        pd.Timestamp("2010-01-01"),
        pd.Timestamp("2010-01-02"),
    ]
    objects = pd.DataFrame({"date": pd.Series(list(local), dtype=object)})
    assert list(parse_dates(objects, "date")) == list(pd.date_range("2010-03-25", periods=6, freq="D"))


def test_cli_fit_reads_a_csv_with_dst_offsets(two_years, tmp_path, capsys):
    data = two_years.copy()
    data["date"] = pd.Series(pd.DatetimeIndex(data["date"]).tz_localize("Europe/Oslo")).astype(str)
    path = tmp_path / "tzcity.csv"
    data.to_csv(path, index=False)
    code = main(["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25", "--json"])
    assert code == 0, capsys.readouterr().err
    plain = airhealth.fit(two_years, outcome="deaths_all", exposure="pm25")
    assert '"n_days": ' + str(plain.n_days) in capsys.readouterr().out


def test_local_midnights_stored_in_utc_are_refused_naming_rows():
    utc = pd.date_range("2010-03-26", periods=5, freq="D", tz="Europe/Oslo").tz_convert("UTC")
    for column in (pd.Series(utc), pd.Series(utc).astype(str)):
        with pytest.raises(DataError) as info:
            parse_dates(pd.DataFrame({"date": column}), "date")
        message = str(info.value)
        assert "not at local midnight" in message and "row 0: 2010-03-25 23:00:00+00:00" in message
        assert "row 3: 2010-03-28 22:00:00+00:00" in message and "tz_convert" in message
    # aware hourly data are still reported as not daily (by check_daily_dates), not as moved midnights
    hourly = pd.DataFrame({"date": pd.date_range("2010-01-01", periods=48, freq="h", tz="UTC"), "y": 1})
    with pytest.raises(DataError, match="is not daily: it has times of day"):
        prepare_daily(hourly)


# --- 2. duplicated column names ------------------------------------------------------------------------


def test_duplicated_column_is_named(two_years):
    doubled = pd.concat([two_years, two_years[["pm25"]]], axis=1)
    with pytest.raises(DataError, match="column 'pm25' appears 2 times in data; rename or drop one"):
        airhealth.fit(doubled, outcome="deaths_all", exposure="pm25")
    require_columns(doubled, ["date", "deaths_all"])  # duplicates elsewhere do not matter
    with pytest.raises(DataError, match="column 'pm25' appears 2 times in table 1"):
        align_daily(doubled[["date", "pm25"]])


# --- 3. date as the index; semicolon files -------------------------------------------------------------


def test_date_index_gets_a_reset_index_hint(two_years):
    indexed = two_years.set_index("date")
    with pytest.raises(DataError, match=r"The index is named 'date': use data\.reset_index\(\)") as info:
        airhealth.fit(indexed, outcome="deaths_all", exposure="pm25")
    assert "column 'date' does not exist" in str(info.value)
    with pytest.raises(DataError, match="Check the spelling"):  # no index hint when it does not apply
        require_columns(two_years, ["dates"])


def test_semicolon_csv_is_recognised_and_readable_with_sep(two_years, tmp_path, capsys):
    path = tmp_path / "semicolon.csv"
    two_years.to_csv(path, index=False, sep=";", decimal=",")
    args = ["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25"]
    assert main(args) == 2
    err = capsys.readouterr().err
    assert "seems to use ';' as separator" in err and "--sep ';'" in err and "--decimal ," in err
    assert main([*args, "--sep", ";", "--decimal", ",", "--json"]) == 0
    plain = airhealth.fit(two_years, outcome="deaths_all", exposure="pm25")
    out = capsys.readouterr().out
    assert '"n_days": ' + str(plain.n_days) in out


# --- 4. single-file outputs need an existing directory -------------------------------------------------


def test_write_without_make_parents_refuses_a_missing_directory(tmp_path):
    target = tmp_path / "no" / "such" / "dir" / "x.csv"
    with pytest.raises(DataError, match=r"directory '.*/no/such/dir' does not exist"):
        write_text(target, "a\n", make_parents=False)
    with pytest.raises(DataError, match="does not exist"):
        write_with(target, lambda tmp: tmp.write_text("a\n"), make_parents=False)
    assert not (tmp_path / "no").exists()
    assert write_text(target, "a\n").read_text() == "a\n"  # the default still creates the tree (reports)


def test_cli_daily_out_in_a_missing_directory(tmp_path, capsys):
    path = tmp_path / "hourly.csv"
    path.write_text("time,v\n" + "".join(f"2022-06-01 {h:02d}:00,1\n" for h in range(24)))
    out = tmp_path / "missing" / "x.csv"
    args = ["daily", str(path), "--time", "time", "--value", "v", "--statistic", "mean", "--out", str(out)]
    assert main(args) == 2
    assert "directory" in capsys.readouterr().err and not (tmp_path / "missing").exists()


# --- 5. fit: unreadable paths; warnings printed before an error ----------------------------------------


def test_cli_fit_directory_and_unreadable_file(tmp_path, monkeypatch, capsys):
    assert main(["fit", str(tmp_path), "--outcome", "y", "--exposure", "x"]) == 2
    assert "is a directory" in capsys.readouterr().err
    path = tmp_path / "locked.csv"
    path.write_text("date,y,x\n")

    def refuse(*args, **kwargs):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr(pd, "read_csv", refuse)  # chmod cannot stop root, who runs these tests in CI
    assert main(["fit", str(path), "--outcome", "y", "--exposure", "x"]) == 2
    assert "could not read" in capsys.readouterr().err


def test_cli_fit_prints_warnings_raised_before_an_error(two_years, tmp_path, capsys):
    data = two_years.drop(index=[100, 101])  # a two-day gap: a DataWarning
    data.loc[200, "deaths_all"] = -1  # then an error
    path = tmp_path / "gap.csv"
    data.to_csv(path, index=False)
    assert main(["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25"]) == 2
    err = capsys.readouterr().err
    assert "warning: 2 calendar day(s) absent" in err and "negative counts" in err
    assert err.index("warning:") < err.index("error:")


# --- 6. daily: monitor hint; wall-clock rows -----------------------------------------------------------


def test_daily_without_monitor_on_several_monitors_hints_at_monitor(tmp_path, capsys):
    lines = ["time,site,v"] + [f"2022-06-01 {h:02d}:00,{s},1" for s in "AB" for h in range(24)]
    path = tmp_path / "two.csv"
    path.write_text("\n".join(lines) + "\n")
    out = tmp_path / "x.csv"
    assert main(["daily", str(path), "--time", "time", "--value", "v", "--statistic", "mean", "--out", str(out)]) == 2
    assert "Several monitors in one table?" in capsys.readouterr().err
    with pytest.raises(DataError, match=r"monitor=COL \(CLI: --monitor COL\)"):
        clean_hourly(pd.read_csv(path), time="time", value="v")


def test_daily_wall_times_name_csv_lines(tmp_path, capsys):
    path = tmp_path / "spring.csv"
    path.write_text("time,v\n2022-03-27 01:00,1\n2022-03-27 02:00,1\n2022-03-27 03:00,1\n")
    args = ["daily", str(path), "--time", "time", "--value", "v", "--statistic", "mean", "--timezone",
            "Europe/Oslo", "--times-in", "wall", "--out", str(tmp_path / "x.csv")]  # fmt: skip
    assert main(args) == 2
    err = capsys.readouterr().err
    assert "in rows 3 (e.g. 2022-03-27 02:00)" in err and "--times-in standard" in err
    assert "Try using" not in err


# --- 7. missing monitor IDs; clean_hourly split ---------------------------------------------------------


def test_missing_monitor_ids_are_an_error_listing_rows():
    hourly = pd.DataFrame(
        {"time": pd.date_range("2022-06-01", periods=4, freq="h"), "site": ["A", None, "A", " "], "v": 1.0},
        index=[2, 3, 4, 5],
    )
    with pytest.raises(DataError, match=r"monitor column 'site' is empty in rows 3, 5"):
        clean_hourly(hourly, time="time", value="v", monitor="site")


def test_clean_hourly_and_its_helpers_are_short():
    # Code lines without the docstring: clean_hourly had 33 (79 with it) before it was split into helpers.
    import airhealth.prep.hourly_input as module

    tree = ast.parse(textwrap.dedent(inspect.getsource(module)))
    sizes = {}
    for node in ast.walk(tree):
        if isinstance(node, ast.FunctionDef):
            body = node.body[1:] if isinstance(node.body[0], ast.Expr) else node.body
            sizes[node.name] = body[-1].end_lineno - body[0].lineno + 1
    assert sizes["clean_hourly"] <= 15, sizes
    assert max(sizes.values()) <= 30, sizes


# --- 8. combined count columns --------------------------------------------------------------------------


def test_combined_max8h_count_columns(tmp_path):
    hours = pd.date_range("2022-06-01", periods=72, freq="h")
    frame = pd.concat([pd.DataFrame({"time": hours, "site": s, "o3": 40.0 + k}) for k, s in enumerate("AB")])
    frame = frame[~((frame["site"] == "B") & (frame["time"] >= "2022-06-02 20:00"))]  # B: 2nd day short
    path = tmp_path / "o3.csv"
    frame.to_csv(path, index=False)
    out = tmp_path / "city.csv"
    args = ["daily", str(path), "--time", "time", "--value", "o3", "--monitor", "site", "--statistic", "max8h",
            "--out", str(out)]  # fmt: skip
    assert main(args) == 0
    city = pd.read_csv(out)
    assert list(city.columns) == ["date", "o3", "n_8h_means", "n_monitors", "n_8h_means_per_monitor"]
    per = daily_statistic(frame, time="time", value="o3", monitor="site", statistic="max8h")
    valid = per[per["valid"]].groupby(per["date"].dt.strftime("%Y-%m-%d"))["n_8h_means"]
    assert city["n_8h_means"].tolist() == valid.sum().reindex(city["date"]).tolist()
    assert city["n_8h_means_per_monitor"].tolist() == valid.mean().round(2).reindex(city["date"]).tolist()


# --- 9. monitor agreement in the report and the CLI ------------------------------------------------------


def _two_monitor_hours(ratio: float) -> pd.DataFrame:
    rng = np.random.default_rng(20240611)
    hours = pd.date_range("2022-01-01", periods=24 * 40, freq="h")
    base = 20 + 10 * np.sin(np.arange(len(hours)) / 24 * 2 * np.pi / 7) + rng.normal(0, 2, len(hours))
    return pd.concat(
        [
            pd.DataFrame({"time": hours, "site": "Harbour", "no2": base}),
            pd.DataFrame({"time": hours, "site": "Ridge", "no2": ratio * base}),
        ],
        ignore_index=True,
    )


def test_hourly_quality_section_has_a_monitor_agreement_table():
    from airhealth.report.data_quality_section import hourly_quality_section
    from airhealth.report.document import Table

    clean = clean_hourly(_two_monitor_hours(5.0), time="time", value="no2", monitor="site")
    daily = aggregate_daily(clean, name="no2")
    section = hourly_quality_section(clean, daily, value="no2")
    tables = {b.name: b for b in section.blocks if isinstance(b, Table)}
    assert "monitor_agreement" in tables and tables["monitor_agreement"].title == "Monitor agreement"
    shown = tables["monitor_agreement"].frame.set_index("monitor")
    direct = monitor_agreement(daily, value="no2").set_index("monitor")
    assert shown["flagged"].tolist() == [True, True] == direct["flagged"].tolist()
    assert shown.loc["Ridge", "ratio_of_means"] == pytest.approx(5.0, abs=5e-4)  # shown to 3 decimals
    assert shown.loc["Ridge", "correlation"] == pytest.approx(1.0, abs=5e-4)
    assert "2 of 2 monitors flagged" in tables["monitor_agreement"].note


def test_cli_daily_warns_about_disagreeing_monitors(tmp_path, capsys):
    path = tmp_path / "two.csv"
    args = ["daily", str(path), "--time", "time", "--value", "no2", "--monitor", "site", "--statistic", "mean",
            "--out", str(tmp_path / "city.csv")]  # fmt: skip
    _two_monitor_hours(5.0).to_csv(path, index=False)
    assert main(args) == 0
    err = capsys.readouterr().err
    assert "warning: monitor 'Ridge' disagrees with the others: mean is 5.00 times the others'" in err
    _two_monitor_hours(1.1).to_csv(path, index=False)
    assert main(args) == 0
    assert "disagrees" not in capsys.readouterr().err


# --- 10. warnings point at the user's line ---------------------------------------------------------------


def test_gap_warning_points_at_the_calling_line(two_years):
    data = two_years.drop(index=[50])
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        airhealth.fit(data, outcome="deaths_all", exposure="pm25")
    gaps = [w for w in caught if issubclass(w.category, DataWarning) and "absent" in str(w.message)]
    assert len(gaps) == 1 and gaps[0].filename == THIS_FILE
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        prepare_daily(data)
    ours = [w for w in caught if issubclass(w.category, AirhealthWarning)]  # not a library's deprecation notice
    assert ours and ours[0].filename == THIS_FILE


def test_hourly_warnings_and_warn_user_point_at_the_calling_line():
    hourly = pd.DataFrame({"time": pd.date_range("2022-06-01", periods=24, freq="h")[::-1], "v": -1.0})
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        daily_statistic(hourly, time="time", value="v")
        warn_user("direct", DataWarning)
    ours = [w for w in caught if issubclass(w.category, AirhealthWarning)]  # not a library's deprecation notice
    assert len(ours) == 3 and {w.filename for w in ours} == {THIS_FILE}
