"""Combining monitors into one city series, checked against hand computations."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from airhealth.errors import DataError, SpecificationError
from airhealth.prep.monitors import combine_monitors, monitor_agreement, screen_monitor_years

NAN = np.nan


def long(table: dict[str, list[float]], start: str = "2022-01-01") -> pd.DataFrame:
    dates = pd.date_range(start, periods=len(next(iter(table.values()))), freq="D")
    return pd.concat(
        [pd.DataFrame({"monitor": m, "date": dates, "no2": v}) for m, v in table.items()], ignore_index=True
    )


HAND = long({"A": [10, 12, NAN, 14], "B": [20, NAN, 24, 22], "C": [NAN, 30, 33, 36]})


def test_centred_method_matches_hand_computation():
    # Monitor means: A (10+12+14)/3 = 12, B (20+24+22)/3 = 22, C (30+33+36)/3 = 33; overall (12+22+33)/3 = 67/3.
    # Day 1: A -2, B -2 -> mean -2; day 2: A 0, C -3 -> -1.5; day 3: B +2, C 0 -> +1; day 4: A +2, B 0, C +3 -> 5/3
    overall = 67 / 3
    expected = [overall - 2, overall - 1.5, overall + 1, overall + 5 / 3]
    got = combine_monitors(HAND, value="no2")
    assert got["no2"].to_numpy() == pytest.approx(expected, rel=1e-12)
    assert got["n_monitors"].tolist() == [2, 2, 2, 3]
    assert list(got.columns) == ["date", "no2", "n_monitors"]


def test_plain_mean_of_available_monitors():
    got = combine_monitors(HAND, value="no2", method="mean")
    assert got["no2"].to_numpy() == pytest.approx([15.0, 21.0, 28.5, 24.0], rel=1e-12)


def test_centred_equals_plain_mean_when_complete():
    complete = long({"A": [10, 12, 11], "B": [20, 25, 22]})
    a = combine_monitors(complete, value="no2", method="mean")["no2"]
    b = combine_monitors(complete, value="no2", method="centred")["no2"]
    assert b.to_numpy() == pytest.approx(a.to_numpy(), rel=1e-12)


def test_minimum_number_of_monitors():
    got = combine_monitors(HAND, value="no2", min_monitors=3)
    assert np.isnan(got["no2"].iloc[:3]).all() and not np.isnan(got["no2"].iloc[3])
    with pytest.raises(SpecificationError, match="min_monitors=0"):
        combine_monitors(HAND, value="no2", min_monitors=0)


def test_centred_method_removes_dropout_jumps():
    # A constant city: the high monitor drops out on even days. The plain mean jumps, the centred one does not.
    days = 20
    low = np.full(days, 10.0)
    high = np.where(np.arange(days) % 2 == 0, NAN, 30.0)
    data = long({"low": list(low), "high": list(high)})
    plain = combine_monitors(data, value="no2", method="mean")["no2"]
    centred = combine_monitors(data, value="no2")["no2"]
    assert plain.max() - plain.min() == pytest.approx(10.0)
    assert centred.to_numpy() == pytest.approx(np.full(days, 20.0), rel=1e-12)


def test_screening_by_year():
    # 2022: 365 days; monitor P valid on 200 (55 %) -> dropped at 75 %; monitor Q complete -> kept.
    dates = pd.date_range("2022-01-01", "2023-01-31", freq="D")
    p = np.where(np.arange(len(dates)) < 200, 5.0, NAN)
    p[-31:] = 5.0  # January 2023 complete
    data = pd.concat(
        [
            pd.DataFrame({"monitor": "P", "date": dates, "no2": p}),
            pd.DataFrame({"monitor": "Q", "date": dates, "no2": 8.0}),
        ],
        ignore_index=True,
    )
    screened, table = screen_monitor_years(data, value="no2")
    row = table.set_index(["monitor", "year"]).loc[("P", 2022)]
    assert row["days"] == 365 and row["valid_days"] == 200 and not row["kept"]
    assert row["fraction"] == pytest.approx(200 / 365, rel=1e-12)
    assert table.set_index(["monitor", "year"]).loc[("P", 2023), "kept"]
    assert screened.loc[(screened["monitor"] == "P") & (screened["date"].dt.year == 2022), "no2"].isna().all()
    assert screened.loc[screened["monitor"] == "Q", "no2"].notna().all()
    assert data["no2"].notna().sum() == 200 + 31 + len(dates)  # input unchanged


def test_agreement_flags_an_uncorrelated_monitor():
    rng = np.random.default_rng(11)
    city = 20 + 8 * np.sin(np.arange(200) / 10) + rng.normal(0, 1, 200)
    data = long(
        {
            "A": list(city + rng.normal(0, 1, 200)),
            "B": list(1.5 * city + rng.normal(0, 1, 200)),
            "C": list(rng.normal(20, 5, 200)),  # a broken analyser: noise around the right level
        }
    )
    table = monitor_agreement(data, value="no2").set_index("monitor")
    # A is compared with the mean of B and the noisy C, so its correlation is diluted (~0.83)
    assert table.loc["A", "correlation"] > 0.7 and not table.loc["A", "flagged"]
    assert table.loc["C", "flagged"] and "correlation" in table.loc["C", "reason"]
    assert table.loc["B", "ratio_of_means"] == pytest.approx(1.5 * 20 / 20, rel=0.1)  # ~1.5 (means ~30 vs ~20)


def test_agreement_flags_a_level_far_off():
    rng = np.random.default_rng(5)
    base = 20 + 8 * np.sin(np.arange(100) / 7)
    data = long({"A": list(base + rng.normal(0, 1, 100)), "B": list(5 * base + rng.normal(0, 1, 100))})
    table = monitor_agreement(data, value="no2").set_index("monitor")
    assert table.loc["B", "flagged"] and "times the others'" in table.loc["B", "reason"]


def test_repeated_monitor_date_is_an_error():
    data = pd.concat([HAND, HAND.iloc[[0]]], ignore_index=True)
    with pytest.raises(DataError, match="A 2022-01-01"):
        combine_monitors(data, value="no2")
