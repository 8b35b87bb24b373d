"""Restricting the period and merging duplicated days (the prep functions behind --start/--end, --duplicates)."""

from __future__ import annotations

import pandas as pd
import pytest

from airhealth.errors import DataError, DataWarning, SpecificationError
from airhealth.prep import merge_duplicate_days, restrict_period


@pytest.fixture
def days() -> pd.DataFrame:
    return pd.DataFrame({
        "date": ["2020-01-01", "2020-01-02", "2020-01-02", "2020-01-03", "2020-01-04"],
        "deaths": [3, 5, 7, 4, 6], "pm25": [10.0, 12.0, 14.0, 9.0, 8.0], "site": ["a", "b", "c", "d", "e"],
    })  # fmt: skip


def test_restrict_period_keeps_both_ends_and_leaves_the_input(days):
    before = days.copy()
    part = restrict_period(days, start="2020-01-02", end="2020-01-03")
    assert part["deaths"].tolist() == [5, 7, 4]
    assert part["date"].tolist() == ["2020-01-02", "2020-01-02", "2020-01-03"]  # values as given
    assert restrict_period(days, end="2020-01-01")["deaths"].tolist() == [3]
    pd.testing.assert_frame_equal(days, before)


def test_restrict_period_errors(days):
    with pytest.raises(SpecificationError, match=r"end 2020-01-01 is before start 2020-01-03"):
        restrict_period(days, start="2020-01-03", end="2020-01-01")
    with pytest.raises(SpecificationError, match=r"start 'soon' is not a date"):
        restrict_period(days, start="soon")
    with pytest.raises(SpecificationError, match=r"has a time of day"):
        restrict_period(days, start="2020-01-02 12:00")
    with pytest.raises(DataError, match=r"no row of data falls in the period 2021-01-01 to the end: .*2020-01-04"):
        restrict_period(days, start="2021-01-01")


def test_merge_duplicate_days_mean_and_first(days):
    before = days.copy()
    with pytest.warns(DataWarning, match=r"1 date appears more than once in data \(2020-01-02\); averaged"):
        mean = merge_duplicate_days(days, "mean")
    assert mean["pm25"].tolist() == [10.0, 13.0, 9.0, 8.0]
    assert mean["deaths"].tolist() == [3, 6, 4, 6]
    assert mean["site"].tolist() == ["a", "b", "d", "e"]
    with pytest.warns(DataWarning, match="kept the first row of each"):
        first = merge_duplicate_days(days, "first")
    assert first["pm25"].tolist() == [10.0, 12.0, 9.0, 8.0]
    pd.testing.assert_frame_equal(days, before)
    assert merge_duplicate_days(days, "error") is days  # left to the date checks, which name the dates
    with pytest.raises(SpecificationError, match="duplicates"):
        merge_duplicate_days(days, "sum")
