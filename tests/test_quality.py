"""Coverage, days lost and gaps on small hand-made series."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from airhealth.errors import DataError
from airhealth.prep.hourly import aggregate_daily
from airhealth.prep.hourly_input import clean_hourly
from airhealth.prep.quality import days_lost, hourly_coverage, longest_gaps


def make_clean() -> pd.DataFrame:
    # Monitor A: 3 days (72 h) with hours 10-16 of day 1 empty (7 h) and day 3 hours 0-2 empty (3 h).
    # Monitor B: only days 2-3 (it starts late), complete.
    hours = pd.date_range("2022-12-31", periods=72, freq="h")
    a = np.arange(72.0)
    a[10:17] = np.nan
    a[48:51] = np.nan
    frame = pd.concat(
        [
            pd.DataFrame({"time": hours, "site": "A", "no2": a}),
            pd.DataFrame({"time": hours[24:], "site": "B", "no2": 5.0}),
        ],
        ignore_index=True,
    )
    return clean_hourly(frame, time="time", value="no2", monitor="site")


def test_hourly_coverage_per_monitor_and_year():
    table = hourly_coverage(make_clean()).set_index(["monitor", "year"])
    # The study period is 31 Dec 2022 (24 h) + 1-2 Jan 2023 (48 h).
    assert table.loc[("A", "2022"), ["hours", "hours_present"]].tolist() == [24, 17]
    assert table.loc[("A", "2023"), ["hours", "hours_present"]].tolist() == [48, 45]
    assert table.loc[("B", "2022"), "hours_present"] == 0  # B had not started: counted as missing
    assert table.loc[("B", "all"), "fraction"] == pytest.approx(48 / 72, rel=1e-12)


def test_longest_gaps():
    gaps = longest_gaps(make_clean(), n=2)
    a = gaps[gaps["monitor"] == "A"]
    assert a["hours"].tolist() == [7, 3]
    assert a["first_missing"].iloc[0] == pd.Timestamp("2022-12-31 10:00")
    assert a["last_missing"].iloc[0] == pd.Timestamp("2022-12-31 16:00")
    b = gaps[gaps["monitor"] == "B"]
    assert b["hours"].tolist() == [24] and b["days"].iloc[0] == 1.0


def test_days_lost_counts_each_rule():
    daily = aggregate_daily(make_clean(), statistic="mean")
    # A: day 1 has 17 hours -> lost; days 2 and 3 valid (24 and 21 hours). B: days 2-3 valid.
    lost = days_lost(daily)
    assert lost.to_dict("records") == [
        {"monitor": "A", "reason": "fewer than 18 valid hours", "days": 1, "share": pytest.approx(1 / 3)}
    ]
    daily8 = aggregate_daily(make_clean(), statistic="max8h")
    lost8 = days_lost(daily8).set_index(["monitor", "reason"])["days"]
    # B's first day (1 Jan) lacks the evening of 31 Dec for its first windows: 18 of 24 ending that day need
    # 6 hours each; windows ending 00:00..04:00 have 1..5 hours -> 19 valid, so B keeps the day.
    assert ("B", "fewer than 18 of 24 valid 8-h means") not in lost8.index
    assert lost8[("A", "fewer than 18 of 24 valid 8-h means")] >= 1


def test_missing_columns_named():
    with pytest.raises(DataError, match="lacks columns"):
        days_lost(pd.DataFrame({"monitor": ["A"]}))
