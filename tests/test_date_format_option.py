"""The ``date_format`` remedy that date messages name works in ``fit``, ``compare`` and ``write_report``.

Reference: the same data with ISO dates (parsed by pandas' ISO 8601 reader) give the same fit; day-first
text is rewritten from those dates with ``strftime("%d/%m/%Y")``, so the expected dates are known exactly.
"""

from __future__ import annotations

import re

import pandas as pd
import pytest

import airhealth
from airhealth.errors import DataError, SpecificationError


@pytest.fixture
def two_years(sample: pd.DataFrame) -> pd.DataFrame:
    iso = sample[["date", "deaths_all", "pm25", "temperature"]].iloc[:730].reset_index(drop=True)
    return iso.assign(date=pd.to_datetime(iso["date"]))


def _day_first(frame: pd.DataFrame) -> pd.DataFrame:
    return frame.assign(date=frame["date"].dt.strftime("%d/%m/%Y"))


def test_the_format_named_in_the_message_fits_the_same_as_iso_dates(two_years):
    options = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}
    with pytest.raises(DataError, match=r"pass date_format='%d/%m/%Y'") as info:
        airhealth.fit(_day_first(two_years), **options)
    named = re.search(r"date_format='([^']+)'", str(info.value)).group(1)
    result = airhealth.fit(_day_first(two_years), date_format=named, **options)
    expected = airhealth.fit(two_years, **options)
    # same days, same design: identical arithmetic, so equal to rounding only
    assert result.coef.to_numpy() == pytest.approx(expected.coef.to_numpy(), rel=1e-12, abs=1e-14)
    assert result.spec.date_format == "%d/%m/%Y"


def test_compare_takes_the_date_format(two_years):
    options = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}
    table = airhealth.compare(_day_first(two_years), ["0", "0-1"], date_format="%d/%m/%Y", **options)
    expected = airhealth.compare(two_years, ["0", "0-1"], **options)
    assert table["rr"].to_numpy() == pytest.approx(expected["rr"].to_numpy(), rel=1e-12)
    assert table["n_days"].tolist() == expected["n_days"].tolist()


def test_write_report_reads_day_first_dates_once_for_fits_and_data_sections(two_years, tmp_path):
    data = _day_first(two_years)
    path = airhealth.write_report(
        data, ["deaths_all"], ["pm25"], ["0"], tmp_path / "rep", temperature="temperature", date_format="%d/%m/%Y"
    )
    effects = pd.read_csv(path.parent / "tables" / "effects.csv")
    assert len(effects) == 1
    assert data["date"].iloc[12] == "13/01/2010"  # the caller's frame keeps its text


def test_a_date_format_the_values_do_not_follow_names_the_rows(two_years):
    with pytest.raises(DataError, match=r"row 0: '01/01/2010'.*follow the date format '%Y-%m-%d'"):
        airhealth.fit(_day_first(two_years), "deaths_all", "pm25", date_format="%Y-%m-%d")


def test_an_empty_date_format_is_refused():
    with pytest.raises(SpecificationError, match=r"date_format must be a date format such as '%d/%m/%Y'.*got ' '"):
        airhealth.ModelSpec(outcome="y", exposure="x", date_format=" ")
