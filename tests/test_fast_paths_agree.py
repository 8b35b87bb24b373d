"""Each shortcut of the fitting path gives exactly what the full computation it skips gives.

The shortcuts (issue 8, item 8: the whole fit within 1.5x of the engine) are exact rearrangements, so the
comparisons here are equality, not tolerances: the row gather by runs against ``block[used]``, the drop
reasons of the left-out days against the reasons of every day, the "all values equal" pre-test against the
guards it guards, and the adopted result against one built through ``FitResult(...)``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.errors import DataError, DataWarning
from airhealth.model import design
from airhealth.model.fitting import fit_design, result_from_fit
from airhealth.model.result import FitResult
from airhealth.model.spec import ModelSpec
from airhealth.prep import degenerate
from airhealth.prep.align import _consecutive_days, prepare_daily

OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}


@pytest.fixture(scope="module")
def sample() -> pd.DataFrame:
    return airhealth.load_sample().iloc[:1500].reset_index(drop=True)


@pytest.mark.parametrize("pattern", ["few gaps", "every third day", "none used at the start", "all used"])
def test_row_gather_equals_boolean_indexing(pattern: str) -> None:
    rng = np.random.default_rng(8)
    block = np.asfortranarray(rng.normal(size=(400, 30)))
    used = np.ones(400, dtype=bool)
    if pattern == "few gaps":
        used[[5, 6, 100, 399]] = False  # 3 runs: copied run by run
    elif pattern == "every third day":
        used[np.arange(400) % 3 != 0] = False  # 134 runs > 30 columns: gathered column by column
    elif pattern == "none used at the start":
        used[:50] = False
    out = np.empty((int(used.sum()), 30), order="F")
    design._gather_rows(block, used, out)
    np.testing.assert_array_equal(out, block[used])


def test_reasons_of_the_left_out_days_equal_the_reasons_of_every_day(sample: pd.DataFrame) -> None:
    gappy = sample.copy()
    gappy.loc[[0, 3, 50, 51, 400, 401, 402], "pm25"] = np.nan
    gappy.loc[[7, 90, 400], "deaths_all"] = np.nan
    gappy.loc[[120, 121], "temperature"] = np.nan
    for lag in ("0", "0-3", "dl0-5"):
        spec = ModelSpec.from_options(lag=lag, **OPTIONS)
        frame = design.model_frame(gappy, spec)
        conf = design.cached_confounders(frame, spec)
        raw = frame["pm25"].to_numpy(dtype=float)
        y = frame["deaths_all"].to_numpy(dtype=float)
        exposure = spec.lag.columns(raw)
        every_day = design._drop_reasons(frame, spec, y, exposure, conf, None)
        built = design.build_design(frame, spec)
        left_out = np.flatnonzero(~built.used)
        np.testing.assert_array_equal(built.used, every_day == "")
        np.testing.assert_array_equal(built.dropped["reason"].to_numpy(dtype=object), every_day[left_out])
        reasons = set(every_day[left_out])
        assert {"outcome missing", "exposure missing"} <= reasons
        assert any("temperature" in r for r in reasons)  # a confounder term's reason too


@pytest.mark.parametrize(
    "values",
    [[0.0, 0.0, np.nan], [3.0, 3.0, 3.0], [3.0, np.nan, 4.0], [np.nan, np.nan], [1.0], [np.inf, 2.0, 2.0]],
)
def test_single_value_pretest_is_true_exactly_when_the_guards_raise(values: list[float]) -> None:
    v = np.array(values)
    dates = pd.date_range("2020-01-01", periods=v.size)
    raised = []
    for check in (degenerate.check_outcome_varies, degenerate.check_exposure_varies):
        try:
            check(v, "x", dates, "days")
            raised.append(False)
        except DataError:
            raised.append(True)
    assert raised == [degenerate._single_value(v)] * 2


@pytest.mark.parametrize("index", ["named", "from 1", "step 2"])
def test_consecutive_days_resets_any_other_index_as_the_full_path_does(sample: pd.DataFrame, index: str) -> None:
    data = sample.iloc[:30].copy()
    if index == "named":
        data.index.name = "row"
    elif index == "from 1":
        data.index = pd.RangeIndex(1, 31)
    else:
        data.index = pd.RangeIndex(0, 60, 2)
    fast = _consecutive_days(data, "date")
    assert fast is not None
    assert isinstance(fast.index, pd.RangeIndex) and fast.index.name is None and list(fast.index) == list(range(30))
    pd.testing.assert_frame_equal(fast, prepare_daily(data.reset_index(drop=True)))


def test_adopted_result_equals_one_built_with_copies(sample: pd.DataFrame) -> None:
    spec = ModelSpec.from_options(lag="0-1", **OPTIONS)
    built = design.build_design(design.model_frame(sample, spec), spec)
    glm = fit_design(built, spec)
    adopted = result_from_fit(built, spec, glm)
    copied = FitResult(
        spec=adopted.spec, coef=adopted.coef, cov=adopted.cov, dispersion=adopted.dispersion,
        deviance=adopted.deviance, loglik=adopted.loglik, qaic=adopted.qaic, df_resid=adopted.df_resid,
        n_days=adopted.n_days, dropped=adopted.dropped, fitted=adopted.fitted, observed=adopted.observed,
        exposure_columns=adopted.exposure_columns, exposure_iqr=adopted.exposure_iqr,
        converged=adopted.converged, n_iter=adopted.n_iter, theta=adopted.theta, bases=adopted.bases,
        aliased=adopted.aliased, notes=adopted.notes,
    )  # fmt: skip
    assert adopted.to_dict() == copied.to_dict()
    pd.testing.assert_frame_equal(adopted.cov, copied.cov)
    # the adopted result shares no memory with the engine's or the design's arrays
    glm.coef[-1] += 1.0
    glm.cov[-1, -1] *= 4.0
    built.response[:] = 0.0
    assert adopted.to_dict() == copied.to_dict()
    assert adopted.observed.sum() > 0


def test_validated_frame_is_reused_only_for_the_same_values(sample: pd.DataFrame) -> None:
    spec = ModelSpec.from_options(lag="0-1", **OPTIONS)
    design.clear_cache()
    first = design.model_frame(sample, spec)
    first.loc[0, "pm25"] = 1e6  # the caller's copy: changing it changes nothing cached
    again = design.model_frame(sample, spec)
    pd.testing.assert_frame_equal(again, design._checked_frame(sample, spec, design.column_roles(spec)))
    assert again is not first and again.loc[0, "pm25"] != 1e6
    coded = sample.copy()
    coded.loc[[10, 11, 12], "pm25"] = -999.0  # same shape, other values: checked afresh, and refused
    with pytest.raises(DataError, match="holds -999 on 3 day"):
        design.model_frame(coded, spec)


def test_a_frame_that_warned_warns_on_every_call(sample: pd.DataFrame) -> None:
    spec = ModelSpec.from_options(lag="0-1", **OPTIONS)
    gap = sample.drop(index=[100, 101])
    design.clear_cache()
    for _ in range(2):
        with pytest.warns(DataWarning, match="2 calendar day"):
            design.model_frame(gap, spec)


def test_text_columns_are_never_taken_from_the_cache(sample: pd.DataFrame) -> None:
    spec = ModelSpec.from_options(lag="0-1", **OPTIONS)
    text = sample.assign(pm25=sample["pm25"].astype(object))
    assert design._frame_key(text, spec, design.column_roles(spec)) is None
    assert design._frame_key(sample, spec, design.column_roles(spec)) is not None


def test_the_validated_frame_cache_keys_on_the_date_format():
    # A frame validated with date_format="excel" must not be reused for a call without it: that call must
    # still be refused with the Excel-serial message.
    import pandas as pd
    import pytest

    import airhealth
    from airhealth.errors import DataError

    data = airhealth.load_sample()
    data = data[data["date"] < "2012-01-01"].reset_index(drop=True)
    serial = (pd.to_datetime(data["date"]) - pd.Timestamp("1899-12-30")).dt.days  # ECMA-376 1900 date system
    coded = data.assign(date=serial.astype("int64"))
    options = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature", "trend_df_per_year": 4}
    with_format = airhealth.fit(coded, date_format="excel", **options)
    assert with_format.coef.equals(airhealth.fit(data, **options).coef)
    with pytest.raises(DataError, match="Excel"):
        airhealth.fit(coded, **options)
