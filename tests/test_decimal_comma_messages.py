"""Files with a semicolon separator or decimal commas, read by pandas' defaults, get the reading remedy.

A decimal comma must never be answered with ``na_values=[...]`` (declaring every number missing); a table
read as one column named ``date;deaths;...`` is pointed at ``sep=';'``. Files are written from the
bundled sample the way European spreadsheets save them (``;`` between fields, ``,`` as decimal mark).
"""

from __future__ import annotations

import io

import pandas as pd
import pytest

import airhealth
from airhealth.errors import DataError

OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}


@pytest.fixture
def semicolon_text(sample: pd.DataFrame) -> str:
    frame = sample[["date", "deaths_all", "pm25", "temperature"]].iloc[:100]
    return frame.to_csv(index=False, sep=";", decimal=",")


def test_decimal_commas_lead_with_decimal_and_never_suggest_na_values(semicolon_text):
    data = pd.read_csv(io.StringIO(semicolon_text), sep=";")  # separator given, decimal mark forgotten
    with pytest.raises(DataError) as info:
        airhealth.fit(data, **OPTIONS)
    message = str(info.value)
    assert "numbers written with a decimal comma: read the file with pd.read_csv(path, sep=';', decimal=',')" in message
    assert "na_values" not in message
    assert "column 'pm25'" in message


def test_other_text_beside_decimal_commas_gets_na_values_for_that_text_only(semicolon_text):
    data = pd.read_csv(io.StringIO(semicolon_text), sep=";")
    data.loc[3, "pm25"] = "<LOD"
    with pytest.raises(DataError) as info:
        airhealth.fit(data, **OPTIONS)
    message = str(info.value)
    assert "decimal=','" in message
    assert "declare them: na_values=['<LOD']" in message


def test_a_semicolon_file_read_as_one_column_suggests_sep_and_decimal(semicolon_text):
    data = pd.read_csv(io.StringIO(semicolon_text))  # pandas defaults
    assert data.shape[1] == 1
    expected = r"one column named 'date;deaths_all;pm25;temperature'.*"
    expected += r"pd\.read_csv\(path, sep=';', decimal=','\) \(command line: --sep ';' --decimal ,\)"
    with pytest.raises(DataError, match=expected):
        airhealth.fit(data, **OPTIONS)


def test_a_semicolon_file_with_decimal_points_suggests_sep_only(sample):
    text = sample[["date", "deaths_all", "pm25"]].iloc[:50].to_csv(index=False, sep=";")
    data = pd.read_csv(io.StringIO(text))
    with pytest.raises(DataError, match=r"Read it with pd\.read_csv\(path, sep=';'\) \(command line: --sep ';'\)\."):
        airhealth.fit(data, "deaths_all", "pm25")
