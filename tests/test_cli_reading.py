"""Reading a user's CSV through the commands: each awkward file gets exit code 2 and a message naming the fix.

Every case runs through ``airhealth.cli.main.main`` as a user would, and asserts the message on stderr.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.cli.main import COMMANDS, build_parser, main
from airhealth.simulate import simulate_city


@pytest.fixture(scope="module")
def year() -> pd.DataFrame:
    """Two invented years (enough days for the default model), ISO dates as text."""
    tables = simulate_city(5, "2016-01-01", "2017-12-31", missing_fraction=0.0, outage_days=0)
    data = airhealth.align_daily(tables["counts"], tables["pollution"], tables["weather"])
    return data.assign(date=data["date"].dt.strftime("%Y-%m-%d"))[["date", "deaths_all", "pm25", "temperature"]]


def _fit(path: Path, *extra: str) -> list[str]:
    return ["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25", *extra]


def _error(capsys: pytest.CaptureFixture, args: list[str]) -> str:
    code = main(args)
    err = capsys.readouterr().err
    assert code == 2, err
    assert "Traceback" not in err
    return err


def _write(tmp_path: Path, name: str, text: str, encoding: str = "utf-8") -> Path:
    path = tmp_path / name
    path.write_bytes(text.encode(encoding))
    return path


def test_semicolon_file_without_sep_suggests_sep_and_decimal(year, tmp_path, capsys):
    path = tmp_path / "semi.csv"
    year.to_csv(path, index=False, sep=";", decimal=",")
    err = _error(capsys, _fit(path))
    assert "'semi.csv' was read as one column" in err.replace(str(tmp_path) + "/", "")
    assert "seems to use ';' as separator: pass --sep ';' --decimal , (a comma)" in err


def test_decimal_commas_read_as_text_suggest_decimal(year, tmp_path, capsys):
    path = tmp_path / "semi.csv"
    year.to_csv(path, index=False, sep=";", decimal=",")
    err = _error(capsys, _fit(path, "--sep", ";"))
    first = year["pm25"].iloc[0]
    assert (
        f"column 'pm25' in semi.csv must hold numbers but has text: '{str(first).replace('.', ',')}' (2016-01-01)"
        in err
    )
    assert "look like numbers with a decimal comma: pass --decimal ," in err
    assert main(_fit(path, "--sep", ";", "--decimal", ",")) == 0


def test_decimal_commas_in_a_comma_separated_file_are_explained(tmp_path, capsys):
    path = _write(tmp_path, "mixed.csv", "date,deaths_all,pm25\n2016-01-01,30,12,5\n2016-01-02,31,13\n")
    err = _error(capsys, _fit(path))
    assert "the rows of" in err and "have more fields than its header (date, deaths_all, pm25)" in err
    assert "decimal comma" in err and "--sep ';' --decimal ," in err


def test_header_with_stray_spaces_names_the_column_as_written(year, tmp_path, capsys):
    path = tmp_path / "spaces.csv"
    year.rename(columns={"pm25": " pm25 "}).to_csv(path, index=False)
    err = _error(capsys, _fit(path))
    assert "column 'pm25' does not exist in spaces.csv" in err
    assert "The header has stray spaces: the column is written ' pm25 '" in err


def test_header_only_and_empty_files_are_clear_errors(tmp_path, capsys):
    header = _write(tmp_path, "header.csv", "date,deaths_all,pm25\n")
    assert "has a header (date, deaths_all, pm25) but no rows of data" in _error(capsys, _fit(header))
    empty = _write(tmp_path, "empty.csv", "")
    assert "is empty: it has no header and no rows" in _error(capsys, _fit(empty))


def test_latin1_file_without_encoding_suggests_it(year, tmp_path, capsys):
    frame = year.assign(site="Mühlheim")
    path = tmp_path / "latin1.csv"
    frame.to_csv(path, index=False, encoding="latin-1")
    err = _error(capsys, _fit(path))
    assert "is not utf-8 text (byte 0xfc on line 2:" in err
    assert "pass --encoding latin-1" in err
    assert main(_fit(path, "--encoding", "latin-1")) == 0


def test_day_first_dates_need_a_date_format(year, tmp_path, capsys):
    path = tmp_path / "dmy.csv"
    dmy = pd.to_datetime(year["date"]).dt.strftime("%d/%m/%Y")
    year.assign(date=dmy).to_csv(path, index=False)
    err = _error(capsys, _fit(path))
    assert "column 'date' in dmy.csv has dates such as '13/01/2016'" in err
    assert "read day first: pass date_format='%d/%m/%Y' (on the command line: --date-format '%d/%m/%Y')" in err
    capsys.readouterr()
    assert main(_fit(path, "--date-format", "%d/%m/%Y", "--json")) == 0
    assert main(_fit(tmp_path / "dmy.csv", "--date-format", "%m/%d/%Y")) == 2
    assert "Every value must follow the date format '%m/%d/%Y'" in capsys.readouterr().err


def test_excel_serial_dates_are_named_and_readable(year, tmp_path, capsys):
    serial = (pd.to_datetime(year["date"]) - pd.Timestamp("1899-12-30")).dt.days  # ECMA-376 day zero
    path = tmp_path / "excel.csv"
    year.assign(date=serial).to_csv(path, index=False)
    err = _error(capsys, _fit(path))
    assert (
        "holds numbers (e.g. 42370), not dates; they look like Excel serial day numbers (42370 would be 2016-01-01)"
        in err
    )
    assert "--date-format 'excel'" in err
    capsys.readouterr()
    iso = tmp_path / "iso.csv"
    year.to_csv(iso, index=False)
    assert main(_fit(path, "--date-format", "excel", "--json")) == 0
    from_excel = capsys.readouterr().out
    assert main(_fit(iso, "--json")) == 0
    assert from_excel == capsys.readouterr().out


def test_text_codes_point_at_na_values(year, tmp_path, capsys):
    frame = year.astype({"pm25": object})
    frame.loc[[4, 9], "pm25"] = "<LOD"
    frame.loc[6, "pm25"] = "NA"  # pandas' default missing-value texts are read as missing
    path = tmp_path / "lod.csv"
    frame.to_csv(path, index=False)
    err = _error(capsys, _fit(path))
    assert "column 'pm25' in lod.csv must hold numbers but has text: '<LOD' (2016-01-05), '<LOD' (2016-01-10)" in err
    assert "If this means 'missing' (e.g. below the limit of detection), pass --na-values '<LOD'" in err
    capsys.readouterr()
    assert main(_fit(path, "--na-values", "<LOD", "--json")) == 0
    assert '"n_days": ' in capsys.readouterr().out


def test_directory_and_missing_file(tmp_path, capsys):
    assert "is a directory" in _error(capsys, _fit(tmp_path))
    assert "does not exist" in _error(capsys, _fit(tmp_path / "nope.csv"))


def test_every_command_has_working_help(capsys):
    for command in COMMANDS:
        with pytest.raises(SystemExit) as info:
            main([command, "--help"])
        assert info.value.code == 0
        assert f"usage: airhealth {command}" in capsys.readouterr().out
    assert set(COMMANDS) == {
        "report",
        "fit",
        "compare",
        "align",
        "daily",
        "demo",
        "sensitivity",
        "burden",
        "fit-cities",
        "pool",
    }
    assert "report" in build_parser().format_help()


def test_version(capsys):
    with pytest.raises(SystemExit) as info:
        main(["--version"])
    assert info.value.code == 0
    assert capsys.readouterr().out.strip() == f"airhealth {airhealth.__version__}"


def test_reading_does_not_guess_a_missing_value_code(year, tmp_path, capsys):
    """-999 without --na-values stays a number here (the guards decide what a far-off value gets);
    with --na-values it is missing, and the fit equals the fit with those days missing."""
    frame = year.copy()
    frame.loc[[20, 40, 60], "pm25"] = -999
    path = tmp_path / "codes.csv"
    frame.to_csv(path, index=False)
    assert main(_fit(path, "--na-values", "-999", "--json")) == 0
    out = capsys.readouterr().out
    expected = airhealth.fit(
        year.assign(pm25=year["pm25"].where(~year.index.isin([20, 40, 60]), np.nan)), outcome="deaths_all",
        exposure="pm25",
    )  # fmt: skip
    assert f'"n_days": {expected.n_days}' in out


def test_a_name_given_twice_in_the_header_is_refused(year, tmp_path, capsys):
    path = tmp_path / "twice.csv"
    year[["date", "deaths_all", "pm25", "temperature"]].rename(columns={"temperature": "pm25"}).to_csv(
        path, index=False
    )
    err = _error(capsys, _fit(path))
    assert "names 'pm25' 2 times (columns 3, 4); rename or remove all but one" in err


def test_suppressed_counts_in_the_outcome_point_at_na_values_and_then_read(year, tmp_path, capsys):
    frame = year.astype({"deaths_all": object})
    frame.loc[[3, 8], "deaths_all"] = "<5"
    path = tmp_path / "suppressed.csv"
    frame.to_csv(path, index=False)
    err = _error(capsys, _fit(path))
    assert "column 'deaths_all' in suppressed.csv must hold numbers but has text: '<5' (2016-01-04)" in err
    assert "pass --na-values '<5'" in err
    capsys.readouterr()
    assert main(_fit(path, "--na-values", "<5,0", "--json")) == 0  # '<5' applies to the counts, 0 does not
    expected = airhealth.fit(year.assign(deaths_all=year["deaths_all"].where(~year.index.isin([3, 8]))),
                             outcome="deaths_all", exposure="pm25")  # fmt: skip
    assert f'"n_days": {expected.n_days}' in capsys.readouterr().out
