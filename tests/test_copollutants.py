"""Co-pollutants at the exposure's lag structure: the result's effects, correlation, guards and the table of
single- vs two-pollutant estimates. Estimates against R and statsmodels: test_copollutant_modifier_against_r.py.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.errors import DataError, DataWarning, SpecificationError


@pytest.fixture(scope="module")
def data() -> pd.DataFrame:
    sample = airhealth.load_sample()
    return sample[sample["date"] < "2014-01-01"].reset_index(drop=True)  # four years: fast fits


def _quiet_fit(data, **options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        return airhealth.fit(data, "deaths_all", "pm25", temperature="temperature", **options)


def test_copollutant_enters_at_the_exposure_lag_and_is_reported(data):
    result = _quiet_fit(data, copollutants=["no2"])
    assert "no2[0-1]" in result.coef.index
    table = result.copollutant_effects(per=10)
    assert list(table.columns) == [
        "copollutant", "lag", "per", "unit", "coef", "se", "rr", "rr_low", "rr_high", "p_value", "correlation",
    ]  # fmt: skip
    row = table.iloc[0]
    assert row["copollutant"] == "no2" and row["lag"] == "0-1"
    assert row["coef"] == pytest.approx(result.coef["no2[0-1]"], rel=1e-12)
    assert row["se"] == pytest.approx(result.std_err["no2[0-1]"], rel=1e-12)
    # RR per 10 units = exp(10 b), interval exp(10 (b ± 1.959964 se)): the standard Wald interval
    assert row["rr"] == pytest.approx(np.exp(10 * row["coef"]), rel=1e-12)
    assert row["rr_low"] == pytest.approx(np.exp(10 * (row["coef"] - 1.959963984540054 * row["se"])), rel=1e-12)


def test_correlation_is_that_of_the_two_moving_averages_on_the_days_used(data):
    result = _quiet_fit(data, copollutants=["o3"])
    used = data.set_index("date").loc[result.fitted.index]
    full = data.set_index("date")
    # independent: pandas rolling means of lags 0-1 (NaN when either day is missing), on the days used
    x = full["pm25"].rolling(2, min_periods=2).mean().loc[used.index]
    z = full["o3"].rolling(2, min_periods=2).mean().loc[used.index]
    assert result.copollutant_correlations[0] == pytest.approx(np.corrcoef(x, z)[0, 1], rel=1e-10)
    assert result.copollutant_effects()["correlation"].iloc[0] == result.copollutant_correlations[0]


def test_distributed_lag_copollutant_has_one_column_per_lag_and_a_cumulative_effect(data):
    result = _quiet_fit(data, lag="dl0-2", copollutants=["no2"])
    names = ["no2[dl0-2]1", "no2[dl0-2]2", "no2[dl0-2]3"]
    assert all(n in result.coef.index for n in names)
    cov = result.cov.loc[names, names].to_numpy()
    row = result.copollutant_effects().iloc[0]
    assert row["coef"] == pytest.approx(result.coef[names].sum(), rel=1e-12)
    assert row["se"] == pytest.approx(np.sqrt(cov.sum()), rel=1e-12)


def test_days_without_the_copollutant_are_dropped_with_a_named_reason(data):
    gappy = data.copy()
    gappy.loc[100:109, "no2"] = np.nan
    result = _quiet_fit(gappy, copollutants=["no2"])
    reasons = result.dropped.set_index("date")["reason"]
    day = gappy["date"][105]
    assert reasons[day] == "co-pollutant no2 (lag 0-1) missing"
    assert result.n_days == _quiet_fit(data, copollutants=["no2"]).n_days - 11  # 10 days and the lag-1 day after


def test_strong_correlation_warns_naming_both_and_r(data):
    with pytest.warns(DataWarning, match=r"exposure 'pm25' is strongly correlated with co-pollutant 'pm10' \(r = 0\.9"):
        airhealth.fit(data, "deaths_all", "pm25", temperature="temperature", copollutants=["pm10"])


def test_weak_correlation_does_not_warn(data):
    with warnings.catch_warnings():
        warnings.simplefilter("error", DataWarning)
        airhealth.fit(data, "deaths_all", "pm25", temperature="temperature", copollutants=["o3"])


def test_near_copy_of_the_exposure_is_refused_naming_both(data):
    copy = data.assign(pm25_b=data["pm25"] * 1.02 + np.sin(np.arange(len(data))) * 0.05)
    with pytest.raises(SpecificationError, match=r"exposure 'pm25' and co-pollutant 'pm25_b' .* nearly collinear"):
        airhealth.fit(copy, "deaths_all", "pm25", copollutants=["pm25_b"])


def test_the_exposure_itself_as_copollutant_is_refused(data):
    with pytest.raises(SpecificationError, match="co-pollutant 'pm25' is the exposure itself"):
        airhealth.fit(data, "deaths_all", "pm25", copollutants=["pm25"])


def test_repeated_copollutant_is_refused(data):
    with pytest.raises(SpecificationError, match="co-pollutant 'no2' is named twice"):
        airhealth.fit(data, "deaths_all", "pm25", copollutants=["no2", "no2"])


def test_copollutant_goes_through_the_missing_code_guard(data):
    coded = data.copy()
    coded.loc[50:55, "no2"] = -999
    with pytest.raises(DataError, match=r"column 'no2' holds -999 on 6 day\(s\)"):
        airhealth.fit(coded, "deaths_all", "pm25", copollutants=["no2"])
    result = _quiet_fit(coded, copollutants=["no2"], na_values=[-999])
    reasons = result.dropped.set_index("date")["reason"]
    assert (reasons[coded["date"][50:56]] == "co-pollutant no2 (lag 0-1) missing").all()


def test_copollutant_goes_through_the_plausibility_guard_with_its_own_unit(data):
    scaled = data.assign(no2=data["no2"] * 1000)  # ng/m³ values declared as µg/m³
    with pytest.raises(DataError, match=r"column 'no2' \(NO2, µg/m³\) has daily values above"):
        airhealth.fit(scaled, "deaths_all", "pm25", copollutants=["no2"])
    result = _quiet_fit(scaled, copollutants=["no2"], units={"no2": "ng/m3"})
    assert result.copollutant_effects()["unit"].iloc[0] == "ng/m³"


def test_copollutant_needs_a_linear_lag_structure():
    term = airhealth.ExposureLagBasis(airhealth.SplineResponse(3), airhealth.parse_lag("dl0-3"))
    with pytest.raises(SpecificationError, match="co-pollutants \\['no2'\\] need a linear lag structure"):
        airhealth.ModelSpec(outcome="y", exposure="pm25", lag=term, copollutants=("no2",))


def test_json_record_lists_each_copollutant(data):
    record = _quiet_fit(data, copollutants=["no2", "o3"]).to_dict(per=10)
    assert [c["copollutant"] for c in record["copollutants"]] == ["no2", "o3"]
    assert set(record["copollutants"][0]) >= {"coef", "se", "rr", "rr_low", "rr_high", "correlation"}
    assert record["rr"] is not None  # the exposure's own effect stays at the top level


def test_compare_fits_each_lag_with_the_copollutant_at_that_lag(data):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        table = airhealth.compare(
            data, ["0", "0-2"], outcome="deaths_all", exposure="pm25", temperature="temperature",
            copollutants=("no2",), common_days=False,  # each row on its own days, as its single fit
        )  # fmt: skip
    for lag in ("0", "0-2"):
        single = _quiet_fit(data, lag=lag, copollutants=["no2"])
        assert f"no2[{lag}]" in single.coef.index
        row = table.set_index("lag").loc[lag]
        assert row["coef"] == pytest.approx(single.exposure_coef, rel=1e-8)


# -- the table of single- vs two-pollutant estimates ---------------------------------------------------


@pytest.fixture(scope="module")
def table(data):
    gappy = data.copy()
    gappy.loc[200:230, "o3"] = np.nan  # the o3 model loses days: every row must use the same days
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        return gappy, airhealth.copollutant_table(
            gappy, exposure="pm25", copollutants=["no2", "o3"], outcome="deaths_all", temperature="temperature"
        )


def test_table_has_one_row_per_model_on_common_days(table):
    _, t = table
    assert list(t.columns) == [
        "exposure", "adjusted_for", "lag", "per", "coef", "se", "rr", "rr_low", "rr_high", "p_value",
        "correlation", "n_days",
    ]  # fmt: skip
    assert pd.isna(t["adjusted_for"][0]) and t["adjusted_for"][1:].tolist() == ["no2", "o3"]
    assert t["n_days"].nunique() == 1


def test_each_table_row_equals_the_single_fit_on_the_same_days(table):
    gappy, t = table
    # the common days are those with no2 and o3 at lag 0-1: masking the outcome elsewhere gives the same days
    masked = gappy.copy()
    window = gappy[["no2", "o3"]].rolling(2, min_periods=2).mean()
    masked.loc[window.isna().any(axis=1), "deaths_all"] = np.nan
    for row, extra in zip(t.itertuples(), [[], ["no2"], ["o3"]], strict=True):
        single = _quiet_fit(masked, copollutants=extra)
        assert single.n_days == row.n_days
        assert row.coef == pytest.approx(single.exposure_coef, rel=1e-8)
        assert row.se == pytest.approx(single.exposure_se, rel=1e-8)


def test_table_needs_a_copollutant(data):
    with pytest.raises(SpecificationError, match="needs at least one co-pollutant"):
        airhealth.copollutant_table(data, exposure="pm25", copollutants=[], outcome="deaths_all")


def test_spec_reads_copollutant_units_from_the_units_mapping():
    spec = airhealth.ModelSpec.from_options(
        outcome="y", exposure="pm25", copollutants="no2", units={"pm25": "ugm3", "no2": "PPB"}
    )
    assert spec.copollutants == ("no2",) and spec.copollutant_units == ("ppb",) and spec.unit == "µg/m³"
    assert airhealth.ModelSpec(outcome="y", exposure="pm25", copollutants=("no2", "o3")).copollutant_units == (
        "µg/m³",
        "µg/m³",
    )


def test_spec_refuses_a_unit_list_of_the_wrong_length():
    with pytest.raises(SpecificationError, match="gives 1 units for 2 co-pollutants"):
        airhealth.ModelSpec(outcome="y", exposure="pm25", copollutants=("no2", "o3"), copollutant_units=("ppb",))
