"""Analyses that use one exposure effect refuse an effect modifier up front, with one message (review defect:
compare crashed with a numpy matmul error, burden likewise, sweep returned rows of None, fit_cities repeated
the error for every city). The guard is airhealth.model.group_effects.require_one_effect."""

from __future__ import annotations

import pandas as pd
import pytest

import airhealth
from airhealth.burden import burden
from airhealth.errors import SpecificationError
from airhealth.studies.sweep import sweep

ONE_EFFECT = r"needs one exposure effect, but modifier='season' gives one per group of 'season'"


@pytest.fixture(scope="module")
def data() -> pd.DataFrame:
    sample = airhealth.load_sample()
    sample = sample[sample["date"] < "2012-01-01"].reset_index(drop=True)  # two years: fast fits
    return sample.assign(season=airhealth.season_column(sample["date"]))


OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature", "modifier": "season"}


def test_compare_and_compare_results_refuse_a_modifier(data):
    with pytest.raises(SpecificationError, match=f"compare {ONE_EFFECT}"):
        airhealth.compare(data, lags=["0", "1"], **OPTIONS)
    from airhealth.studies.compare import compare_results

    with pytest.raises(SpecificationError, match=f"compare {ONE_EFFECT}"):
        compare_results(data, ["0", "1"], **OPTIONS)


def test_sweep_refuses_a_modifier_given_or_swept(data):
    with pytest.raises(SpecificationError, match=f"sweep {ONE_EFFECT}"):
        sweep(data, values=[4, 6], **OPTIONS)
    options = {k: v for k, v in OPTIONS.items() if k != "modifier"}
    with pytest.raises(SpecificationError, match=f"sweep {ONE_EFFECT}"):
        sweep(data, option="modifier", values=[None, "season"], **options)


def test_sensitivity_refuses_a_modifier(data):
    with pytest.raises(SpecificationError, match=f"sensitivity {ONE_EFFECT}"):
        airhealth.sensitivity(data, checks={"trend_df_per_year": [4]}, **OPTIONS)


def test_burden_refuses_a_fit_with_a_modifier(data):
    fitted = airhealth.fit(data, lag="0", **OPTIONS)
    with pytest.raises(SpecificationError, match=f"burden {ONE_EFFECT}.*effects_by_group"):
        burden(fitted, 15.0)


def test_fit_cities_refuses_a_modifier_once_before_any_city(data):
    cities = {"Norhaven": data, "Eastport": data}
    with pytest.raises(SpecificationError, match=f"fit_cities {ONE_EFFECT}"):
        airhealth.fit_cities(cities, show_progress=False, **OPTIONS)
