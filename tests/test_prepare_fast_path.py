"""The fast path of prepare_daily (dates already consecutive days) gives exactly what the full checks give."""

from __future__ import annotations

import pandas as pd
import pytest

import airhealth
from airhealth.errors import DataWarning
from airhealth.prep.align import _consecutive_days, prepare_daily
from airhealth.prep.calendar import complete_calendar
from airhealth.prep.validate import check_daily_dates, parse_dates


def _slow(frame: pd.DataFrame) -> pd.DataFrame:
    dates = parse_dates(frame, "date")
    check_daily_dates(dates)
    return complete_calendar(frame, dates)


def test_fast_path_equals_the_full_checks() -> None:
    data = airhealth.load_sample().iloc[:400].copy()
    data.index = range(1000, 1400)  # an odd index must not leak through
    fast = _consecutive_days(data, "date")
    assert fast is not None
    pd.testing.assert_frame_equal(fast, _slow(data))
    pd.testing.assert_frame_equal(prepare_daily(data), _slow(data))


@pytest.mark.parametrize(
    "change",
    ["gap", "unsorted", "duplicate", "time of day", "text"],
)
def test_anything_unusual_takes_the_full_checks(change: str) -> None:
    data = airhealth.load_sample().iloc[:60].copy()
    if change == "gap":
        data = data.drop(index=10)
    elif change == "unsorted":
        data = data.iloc[::-1]
    elif change == "duplicate":
        data = pd.concat([data, data.iloc[[5]]])
    elif change == "time of day":
        data["date"] = data["date"] + pd.Timedelta(hours=1)
    else:
        data["date"] = data["date"].dt.strftime("%Y-%m-%d")
    assert _consecutive_days(data, "date") is None
    if change == "gap":
        with pytest.warns(DataWarning, match="1 calendar day"):
            assert len(prepare_daily(data)) == 60
    elif change in ("unsorted", "text"):
        out = prepare_daily(data)
        assert out["date"].is_monotonic_increasing and len(out) == 60
