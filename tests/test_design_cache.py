"""The confounder block is reused for repeated fits on the same data, and never for changed data."""

from __future__ import annotations

import numpy as np
import pytest

import airhealth
from airhealth.model import design
from airhealth.model.spec import ModelSpec


@pytest.fixture()
def frame() -> object:
    data = airhealth.load_sample()
    data = data[data["date"] < "2014-01-01"]
    spec = ModelSpec(outcome="deaths_all", exposure="pm25", temperature="temperature")
    return design.model_frame(data, spec), spec


def test_same_data_and_terms_reuse_the_block(frame: tuple) -> None:
    f, spec = frame
    first = design.cached_confounders(f, spec)
    again = design.cached_confounders(f.copy(), spec.replace(exposure="no2", lag="2"))
    assert again is first
    assert not first.matrix.flags.writeable  # shared blocks cannot be changed by a caller


def test_changed_values_or_terms_build_a_new_block(frame: tuple) -> None:
    f, spec = frame
    first = design.cached_confounders(f, spec)
    changed = f.copy()
    changed.loc[changed.index[10], "temperature"] += 0.1
    other = design.cached_confounders(changed, spec)
    assert other is not first
    assert not np.array_equal(other.matrix, first.matrix, equal_nan=True)
    assert design.cached_confounders(f, spec.replace(trend_df_per_year=5)) is not first


def test_cached_and_fresh_blocks_give_identical_fits(frame: tuple) -> None:
    f, spec = frame
    fresh = design.build_design(f, spec, design.build_confounders(f, spec))
    cached = design.build_design(f, spec)
    np.testing.assert_array_equal(fresh.matrix, cached.matrix)


def test_usable_days_equals_the_drop_rules(frame: tuple) -> None:
    f, spec = frame
    gappy = f.copy()
    gappy.loc[gappy.index[[3, 50, 51, 400]], "pm25"] = np.nan
    gappy.loc[gappy.index[[7, 90]], "deaths_all"] = np.nan
    gappy.loc[gappy.index[[120]], "temperature"] = np.nan
    for lag in ("0", "0-3", "dl0-5"):
        s = spec.replace(lag=lag)
        d = design.build_design(gappy, s)
        raw = gappy["pm25"].to_numpy(dtype=float)
        fast = design.usable_days(
            gappy["deaths_all"].to_numpy(dtype=float), s.lag.columns(raw), design.cached_confounders(gappy, s)
        )
        np.testing.assert_array_equal(fast, d.used)
        assert (~d.used).sum() == len(d.dropped) > 10
