"""Reading dates: ISO as is, other orders only with a format, Excel serial numbers, and their messages.

Reference for Excel serial numbers: ECMA-376 (Office Open XML), "Date Representation", 1900 date base
system: DATEVALUE("03-Feb-1910") = 3687 and DATEVALUE("01-Feb-2006") = 38749; day 0 is 1899-12-30 for
serial numbers from 61 (1900-03-01) on, because the format counts a 29 February 1900 that never was.
"""

from __future__ import annotations

import pandas as pd
import pytest

from airhealth.errors import DataError
from airhealth.prep.validate import parse_dates, require_columns


def _parse(values, date_format=None) -> list[str]:
    frame = pd.DataFrame({"date": values})
    return list(parse_dates(frame, "date", "city.csv", date_format=date_format).strftime("%Y-%m-%d"))


def test_excel_serial_numbers_match_the_standard():
    assert _parse([3687, 38749], "excel") == ["1910-02-03", "2006-02-01"]
    assert _parse(["61", "38749"], "excel") == ["1900-03-01", "2006-02-01"]  # numbers read as text work too


def test_excel_numbers_out_of_range_are_named():
    with pytest.raises(
        DataError, match=r"Excel serial day numbers, but some values are not whole numbers from 61.*: row 1: 60\."
    ):
        _parse([61, 60], "excel")
    with pytest.raises(DataError, match=r"row 0: 43831.5"):
        _parse([43831.5, 43832], "excel")


def test_numbers_without_a_format_are_named_with_the_hint():
    with pytest.raises(DataError, match=r"Excel serial day numbers \(43831 would be 2020-01-01\).*'excel'"):
        _parse([43831, 43832])
    with pytest.raises(DataError, match=r"yyyymmdd dates: pass date_format='%Y%m%d'"):
        _parse([20200101, 20200102])
    assert _parse([20200101, 20200102], "%Y%m%d") == ["2020-01-01", "2020-01-02"]
    with pytest.raises(DataError, match=r"holds numbers \(e.g. 1.5\), not dates. Use ISO dates"):
        _parse([1.5, 2.5])


@pytest.mark.parametrize(
    ("values", "message"),
    [
        (["01/02/2010", "13/02/2010"], r"such as '13/02/2010'.*read day first: pass date_format='%d/%m/%Y'"),
        (["01/02/2010", "01/13/2010"], r"such as '01/02/2010'.*read month first: pass date_format='%m/%d/%Y'"),
        (["31.12.09", "01.01.10"], r"read day first: pass date_format='%d.%m.%y'"),
        (["01/02/2010", "02/02/2010"], r"cannot be told from the data; if day first, .*'%d/%m/%Y'.*if month first"),
        (["13/01/2010", "01/13/2010"], r"differs between rows"),
    ],
)
def test_day_and_month_order_is_never_guessed(values, message):
    with pytest.raises(DataError, match=message):
        _parse(values)


def test_a_given_format_reads_day_first_and_names_rows_that_do_not_follow_it():
    assert _parse(["01/02/2010", "13/02/2010"], "%d/%m/%Y") == ["2010-02-01", "2010-02-13"]
    with pytest.raises(DataError, match=r"row 1: '2010-02-13'.*follow the date format '%d/%m/%Y'"):
        _parse(["01/02/2010", "2010-02-13"], "%d/%m/%Y")


def test_unambiguous_forms_still_read_without_a_format():
    assert _parse(["2010-01-02", "2010-01-13"]) == ["2010-01-02", "2010-01-13"]
    assert _parse(["2010/01/02", "2010/01/13"]) == ["2010-01-02", "2010-01-13"]


def test_header_with_stray_spaces_is_pointed_out():
    frame = pd.DataFrame({"date ": ["2010-01-01"], "PM25": [1.0]})
    with pytest.raises(DataError, match=r"stray spaces: the column is written 'date '"):
        require_columns(frame, ["date"], "city.csv")
    with pytest.raises(DataError, match=r"case-sensitive: did you mean 'PM25'\?"):
        require_columns(frame, ["pm25"], "city.csv")
