"""Period bounds (``restrict_period``, ``--start`` / ``--end``) are ISO days or follow the given date format.

``02/01/2015`` could be 2 January or 1 February: it is refused, naming the value, never read one way.
Reference for the expected days: the calendar itself (ISO 8601 YYYY-MM-DD).
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from airhealth.cli.main import main
from airhealth.errors import SpecificationError
from airhealth.prep import restrict_period


@pytest.fixture
def days() -> pd.DataFrame:
    dates = pd.date_range("2015-01-01", periods=60)
    return pd.DataFrame({"date": dates.strftime("%d/%m/%Y"), "deaths": range(60)})


def test_an_ambiguous_bound_is_refused_naming_the_value(days):
    with pytest.raises(SpecificationError, match=r"start '02/01/2015' is not a date in ISO form \(YYYY-MM-DD"):
        restrict_period(days, start="02/01/2015", date_format="%Y%m%d")
    iso = days.assign(date=pd.to_datetime(days["date"], format="%d/%m/%Y"))
    with pytest.raises(SpecificationError, match=r"end '1/2/2015' is not a date in ISO form"):
        restrict_period(iso, end="1/2/2015")


def test_a_bound_in_the_given_date_format_reads_as_that_format(days):
    part = restrict_period(days, start="02/01/2015", end="2015-01-04", date_format="%d/%m/%Y")
    assert part["date"].tolist() == ["02/01/2015", "03/01/2015", "04/01/2015"]  # 2 January, not 1 February


def test_the_command_line_refuses_an_ambiguous_start_and_prints_no_result(sample, tmp_path: Path, capsys):
    path = tmp_path / "city.csv"
    sample[["date", "deaths_all", "pm25"]].iloc[:800].to_csv(path, index=False)
    capsys.readouterr()
    code = main(["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25", "--start", "02/01/2010"])
    captured = capsys.readouterr()
    assert code == 2
    assert "start '02/01/2010' is not a date in ISO form (YYYY-MM-DD" in captured.err
    assert captured.out == ""
