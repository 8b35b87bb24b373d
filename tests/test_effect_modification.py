"""Effect modification: per-level exposure terms, effects by group, the Wald test of equal effects, the
season helper, bad modifiers, and several outcomes in one call. Estimates and the test against R and
statsmodels: test_copollutant_modifier_against_r.py.
"""

from __future__ import annotations

import pickle

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import airhealth
from airhealth.errors import DataError, SpecificationError


@pytest.fixture(scope="module")
def data() -> pd.DataFrame:
    sample = airhealth.load_sample()
    sample = sample[sample["date"] < "2014-01-01"].reset_index(drop=True)  # four years: fast fits
    return sample.assign(season=airhealth.season_column(sample["date"]))


@pytest.fixture(scope="module")
def by_season(data) -> airhealth.FitResult:
    return airhealth.fit(data, "deaths_all", "pm25", temperature="temperature", modifier="season")


def test_one_exposure_coefficient_per_level_and_the_level_main_effect(by_season):
    assert by_season.groups == ("cold", "warm")
    assert by_season.exposure_columns == ("pm25[0-1]:season=cold", "pm25[0-1]:season=warm")
    assert "season[warm]" in by_season.coef.index  # main effect, cold as reference


def test_effects_by_group_is_a_tidy_table_of_each_level(by_season):
    table = by_season.effects_by_group(per=10)
    assert list(table.columns[:6]) == ["group", "coef", "se", "rr", "rr_low", "rr_high"]
    assert table["group"].tolist() == ["cold", "warm"]
    for row, name in zip(table.itertuples(), by_season.exposure_columns, strict=True):
        assert row.coef == pytest.approx(by_season.coef[name], rel=1e-12)
        assert row.se == pytest.approx(by_season.std_err[name], rel=1e-12)
        assert row.rr == pytest.approx(np.exp(10 * row.coef), rel=1e-12)
    assert table["n_days"].sum() == by_season.n_days
    assert table["events"].sum() == pytest.approx(by_season.observed.sum())


def test_modification_test_is_the_wald_chi_square_of_the_difference(by_season):
    test = by_season.modification_test()
    names = list(by_season.exposure_columns)
    b = by_season.coef[names].to_numpy()
    v = by_season.cov.loc[names, names].to_numpy()
    # two levels: (b2 - b1)^2 / (v11 + v22 - 2 v12), chi-square on 1 df (Wald 1943)
    expected = (b[1] - b[0]) ** 2 / (v[0, 0] + v[1, 1] - 2 * v[0, 1])
    assert test["statistic"] == pytest.approx(expected, rel=1e-10)
    assert test["df"] == 1
    assert test["p_value"] == pytest.approx(stats.chi2.sf(expected, 1), rel=1e-10)


def test_modification_test_uses_the_hac_covariance_when_asked(data, by_season):
    hac = airhealth.fit(data, "deaths_all", "pm25", temperature="temperature", modifier="season", interval="hac")
    names = list(hac.exposure_columns)
    b, v = hac.coef[names].to_numpy(), hac.cov.loc[names, names].to_numpy()
    expected = (b[1] - b[0]) ** 2 / (v[0, 0] + v[1, 1] - 2 * v[0, 1])
    assert hac.modification_test()["statistic"] == pytest.approx(expected, rel=1e-10)
    assert hac.modification_test()["statistic"] != pytest.approx(by_season.modification_test()["statistic"])


def test_distributed_lag_with_a_modifier_gives_per_level_lag_coefficients(data):
    result = airhealth.fit(data, "deaths_all", "pm25", lag="dl0-2", temperature="temperature", modifier="season")
    assert len(result.exposure_columns) == 6
    table = result.effects_by_group()
    warm = [n for n in result.exposure_columns if n.endswith("season=warm")]
    assert table.set_index("group").loc["warm", "coef"] == pytest.approx(result.coef[warm].sum(), rel=1e-12)
    se = np.sqrt(result.cov.loc[warm, warm].to_numpy().sum())
    assert table.set_index("group").loc["warm", "se"] == pytest.approx(se, rel=1e-12)


def test_single_effect_is_refused_with_a_modifier_and_names_the_methods(by_season):
    with pytest.raises(SpecificationError, match=r"differs by level of 'season' \(cold, warm\).*effects_by_group"):
        by_season.effect()
    assert "by season (cold, warm" in repr(by_season)


def test_json_record_has_groups_and_the_test(by_season):
    record = by_season.to_dict(per=10)
    assert record["modifier"] == "season"
    assert [g["group"] for g in record["groups"]] == ["cold", "warm"]
    assert set(record["modification_test"]) == {"statistic", "df", "p_value", "test"}
    assert record["rr"] is None and record["coef"] is None  # no single effect


def test_result_with_groups_survives_pickling(by_season):
    again = pickle.loads(pickle.dumps(by_season))
    pd.testing.assert_frame_equal(again.effects_by_group(), by_season.effects_by_group())


def test_fit_without_modifier_has_no_group_effects(data):
    result = airhealth.fit(data, "deaths_all", "pm25")
    with pytest.raises(SpecificationError, match="this fit has no effect modifier"):
        result.effects_by_group()


# -- bad modifiers ---------------------------------------------------------------------------------------


def test_modifier_with_one_level_is_refused(data):
    with pytest.raises(DataError, match=r"modifier column 'group' has a single level \('all'\)"):
        airhealth.fit(data.assign(group="all"), "deaths_all", "pm25", modifier="group")


def test_level_with_too_few_days_names_the_level_and_the_counts(data):
    group = np.where(np.arange(len(data)) < 12, "first", "rest")
    with pytest.raises(DataError, match=r"level 'first' of modifier 'group' .* 11 days used and \d+ events"):
        airhealth.fit(data.assign(group=group), "deaths_all", "pm25", modifier="group")


def test_level_with_too_few_events_names_the_level(data):
    few = data.copy()
    few["rare"] = np.where(few["season"] == "warm", 0, few["deaths_all"] // 40)
    with pytest.raises(DataError, match=r"level 'warm' of modifier 'season' .* and 0 events"):
        airhealth.fit(few, "rare", "pm25", modifier="season")


def test_modifier_with_missing_values_names_the_days(data):
    gappy = data.copy()
    gappy["season"] = gappy["season"].astype(object)
    gappy.loc[10:12, "season"] = None
    with pytest.raises(
        DataError, match=r"modifier column 'season' is missing on 3 days with an outcome \(2010-01-11, 2010-01-12"
    ):
        airhealth.fit(gappy, "deaths_all", "pm25", modifier="season")


def test_modifier_may_be_missing_where_there_is_no_outcome(data):
    gap = data.drop(index=range(300, 310))  # ten days absent: the calendar gets them back, without a level
    with pytest.warns(airhealth.DataWarning, match="10 calendar day"):
        result = airhealth.fit(gap, "deaths_all", "pm25", temperature="temperature", modifier="season")
    with pytest.warns(airhealth.DataWarning, match="10 calendar day"):
        plain = airhealth.fit(gap, "deaths_all", "pm25", temperature="temperature")
    assert result.n_days == plain.n_days  # the modifier loses no day the model without it uses
    assert result.effects_by_group()["n_days"].sum() == result.n_days


def test_numeric_modifier_with_many_levels_asks_to_bin(data):
    with pytest.raises(SpecificationError, match=r"numeric with 90 distinct values.*bin it first"):
        airhealth.fit(data.assign(age=np.arange(len(data)) % 90), "deaths_all", "pm25", modifier="age")


def test_numeric_modifier_with_few_levels_is_a_categorical(data):
    coded = data.assign(hot=(data["season"] == "warm").astype(int))
    a = airhealth.fit(coded, "deaths_all", "pm25", modifier="hot").effects_by_group()
    b = airhealth.fit(data, "deaths_all", "pm25", modifier="season").effects_by_group()
    np.testing.assert_allclose(a["coef"], b["coef"], rtol=1e-10)


def test_modifier_cannot_be_the_exposure():
    with pytest.raises(SpecificationError, match="modifier 'pm25' is also the exposure"):
        airhealth.ModelSpec(outcome="y", exposure="pm25", modifier="pm25")


# -- season_column ---------------------------------------------------------------------------------------


def test_season_column_marks_april_to_september_warm_by_default():
    dates = pd.Series(pd.date_range("2020-01-01", "2020-12-31", freq="MS"), index=range(100, 112))
    season = airhealth.season_column(dates)
    assert season.name == "season" and list(season.index) == list(range(100, 112))
    assert season.tolist() == ["cold"] * 3 + ["warm"] * 6 + ["cold"] * 3
    assert list(season.cat.categories) == ["cold", "warm"]


def test_season_column_takes_southern_months_and_iso_text():
    season = airhealth.season_column(pd.Series(["2020-01-10", "2020-07-10"]), warm_months=(10, 11, 12, 1, 2, 3))
    assert season.tolist() == ["warm", "cold"]


@pytest.mark.parametrize("months", [(), tuple(range(1, 13)), (0, 5), (4, 13)])
def test_season_column_refuses_bad_months(months):
    with pytest.raises(SpecificationError, match="warm_months"):
        airhealth.season_column(pd.Series(pd.date_range("2020-01-01", periods=3)), warm_months=months)


# -- several outcomes ------------------------------------------------------------------------------------


def test_fit_outcomes_rows_equal_the_single_fits(data):
    outcomes = ["admissions_respiratory", "admissions_cardiovascular"]
    table = airhealth.fit_outcomes(data, outcomes, exposure="pm25", temperature="temperature")
    assert list(table.columns) == [
        "outcome", "exposure", "lag", "per", "coef", "se", "rr", "rr_low", "rr_high", "p_value", "n_days",
        "dispersion",
    ]  # fmt: skip
    for row, outcome in zip(table.itertuples(), outcomes, strict=True):
        single = airhealth.fit(data, outcome, "pm25", temperature="temperature")
        assert row.outcome == outcome
        assert row.coef == pytest.approx(single.exposure_coef, rel=1e-12)
        assert row.se == pytest.approx(single.exposure_se, rel=1e-12)
        assert row.dispersion == pytest.approx(single.dispersion, rel=1e-12)


def test_fit_outcomes_with_a_modifier_gives_one_row_per_outcome_and_group(data):
    outcomes = ["deaths_all", "admissions_respiratory"]
    table = airhealth.fit_outcomes(data, outcomes, exposure="pm25", modifier="season")
    assert table[["outcome", "group"]].values.tolist() == [
        ["deaths_all", "cold"], ["deaths_all", "warm"], ["admissions_respiratory", "cold"],
        ["admissions_respiratory", "warm"],
    ]  # fmt: skip
    single = airhealth.fit(data, "admissions_respiratory", "pm25", modifier="season")
    rows = table[table["outcome"] == "admissions_respiratory"]
    np.testing.assert_allclose(rows["coef"], single.effects_by_group()["coef"], rtol=1e-12)
    assert rows["modification_p_value"].iloc[0] == pytest.approx(single.modification_test()["p_value"])


@pytest.mark.parametrize(
    ("outcomes", "message"),
    [([], "needs a list of outcome columns"), (["deaths_all", "deaths_all"], "'deaths_all' is named twice")],
)
def test_fit_outcomes_refuses_bad_lists(data, outcomes, message):
    with pytest.raises(SpecificationError, match=message):
        airhealth.fit_outcomes(data, outcomes, exposure="pm25")
