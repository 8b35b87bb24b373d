"""Checks on what a fit reports and refuses: IQR increments, exposure losses, gaps, repeated columns."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.errors import DataError, DataWarning, SpecificationError
from airhealth.model.effects import relative_risk


@pytest.fixture(scope="module")
def data() -> pd.DataFrame:
    d = airhealth.load_sample()
    return d[d["date"] < "2015-01-01"].reset_index(drop=True)


def test_iqr_increment_is_the_daily_exposure_iqr_for_every_lag(data: pd.DataFrame) -> None:
    fits = airhealth.studies.compare.compare_results(data, ["0-1", "dl0-1"], outcome="deaths_all", exposure="pm25")
    # both use the same days (lags 0 and 1), so the same increment: the IQR of daily pm25 on those days
    days = fits[0].observed.index
    daily = data.set_index("date").loc[days, "pm25"]
    iqr = float(np.subtract(*np.nanpercentile(daily, [75, 25])))
    assert fits[0].exposure_iqr == pytest.approx(iqr, rel=1e-12)
    assert fits[1].exposure_iqr == pytest.approx(iqr, rel=1e-12)
    e = fits[0].effect(scale="iqr")
    assert e.rr == pytest.approx(np.exp(iqr * fits[0].exposure_coef), rel=1e-12)


def test_per_and_iqr_together_are_refused(data: pd.DataFrame) -> None:
    result = airhealth.fit(data, "deaths_all", "pm25")
    with pytest.raises(SpecificationError, match="either per"):
        result.effect(per=5, scale="iqr")
    assert result.effect().per == 10


def test_exposure_losses_in_lag_windows_are_warned(data: pd.DataFrame) -> None:
    sparse = data.copy()
    sparse.loc[sparse.index % 3 == 1, "pm25"] = np.nan  # two consecutive days in three
    with pytest.warns(DataWarning, match=r"leaves \d+ of \d+ days unusable") as caught:
        result = airhealth.fit(sparse, "deaths_all", "pm25", lag="0-1")
    message = str(next(w.message for w in caught if "unusable" in str(w.message)))
    assert f"the fit uses {result.n_days} days" in message


def test_intermittent_exposure_with_a_window_explains_what_to_do(data: pd.DataFrame) -> None:
    one_in_three = data.copy()
    one_in_three.loc[one_in_three.index % 3 != 0, "pm25"] = np.nan
    with pytest.raises(DataError, match="min_count=1"):
        airhealth.fit(one_in_three, "deaths_all", "pm25", lag="0-1")


@pytest.mark.parametrize("role", ["temperature", "humidity", "confounders"])
def test_the_exposure_cannot_also_be_a_confounder(data: pd.DataFrame, role: str) -> None:
    value = ["pm25"] if role == "confounders" else "pm25"
    with pytest.raises(SpecificationError, match="'pm25' is both the exposure"):
        airhealth.fit(data, "deaths_all", "pm25", **{role: value})


def test_temperature_as_the_exposure_needs_temperature_none(data: pd.DataFrame) -> None:
    with pytest.raises(SpecificationError, match="temperature=None"):
        airhealth.fit(data, "deaths_all", "temperature", temperature="temperature")
    with warnings.catch_warnings():
        warnings.simplefilter("error", DataWarning)
        airhealth.fit(data, "deaths_all", "temperature", temperature=None, lag="0")


def test_effect_html_is_escaped() -> None:
    e = relative_risk(0.001, 0.0005, exposure="<b>pm</b>", lag="0")
    assert "<b>pm</b>" not in e._repr_html_() and "&lt;b&gt;pm&lt;/b&gt;" in e._repr_html_()


def test_iqr_falls_back_to_every_measured_day_when_no_day_used_has_a_same_day_value(sample):
    # Monitoring every third day fitted at lag 1: no day used has its own same-day value, so the IQR is taken
    # over every day with a value (numpy's quartiles, linear interpolation, as R's type 7).
    import warnings

    import numpy as np

    import airhealth

    data = sample[sample["date"] < "2013-01-01"].reset_index(drop=True)
    data = data.assign(pm25=data["pm25"].where(data.index % 3 == 0))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = airhealth.fit(data, "deaths_all", "pm25", lag="1", temperature="temperature", trend_df_per_year=2)
    measured = data["pm25"].dropna().to_numpy()
    q1, q3 = np.percentile(measured, [25, 75])
    assert result.exposure_iqr == q3 - q1
