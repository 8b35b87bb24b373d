"""Choice of the time df per year: QAIC of single fits and residual partial autocorrelations of statsmodels.

References: the QAIC of each single :func:`airhealth.fit` (its QAIC is checked against base R in
test_against_r.py); statsmodels ``tsa.stattools.pacf(method="ldb")`` (Durbin–Levinson on the biased sample
autocorrelations, as R ``pacf``) on the same deviance residuals, on a series without gaps. The sum of
absolute PACF is then the same arithmetic: 1e-10 absolute (rounding in sums over ~2000 days). The chosen
value is recomputed by hand as the argmin of those reference numbers.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from statsmodels.tsa.stattools import pacf

import airhealth
from airhealth.errors import DataError, FitError, SpecificationError

OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature", "lag": "0-1"}
VALUES = [3, 5, 8, 12]


@pytest.fixture(scope="module")
def gap_free():
    """Six years of the sample with the exposure's missing days filled, so the residuals have no gaps."""
    data = airhealth.load_sample()
    data = data[data["date"] < "2016-01-01"].reset_index(drop=True)
    return data.assign(pm25=data["pm25"].interpolate(), temperature=data["temperature"].interpolate())


@pytest.fixture(scope="module")
def references(gap_free):
    out = {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for value in VALUES:
            result = airhealth.fit(gap_free, trend_df_per_year=value, **OPTIONS)
            residuals = result.residuals("deviance")
            assert (residuals.index.to_series().diff().dropna().dt.days == 1).all()  # no gap
            sum_abs = np.abs(pacf(residuals.to_numpy(), nlags=30, method="ldb")[1:]).sum()
            out[value] = {"qaic": result.qaic, "sum_abs_pacf": sum_abs, "rr": result.effect(per=10).rr}
    return out


@pytest.mark.parametrize("criterion", ["qaic", "pacf"])
def test_table_and_choice_equal_the_references(gap_free, references, criterion):
    choice = airhealth.choose_time_df(gap_free, values=VALUES, criterion=criterion, **OPTIONS)
    table = choice.table
    assert list(table["trend_df_per_year"]) == VALUES
    for row in table.to_dict(orient="records"):
        reference = references[row["trend_df_per_year"]]
        assert row["qaic"] == pytest.approx(reference["qaic"], rel=1e-10)
        assert row["sum_abs_pacf"] == pytest.approx(reference["sum_abs_pacf"], abs=1e-10)
        assert row["rr"] == pytest.approx(reference["rr"], rel=1e-10)
    key = "qaic" if criterion == "qaic" else "sum_abs_pacf"
    by_hand = VALUES[int(np.argmin([references[v][key] for v in VALUES]))]
    assert choice.chosen == by_hand and choice.criterion == criterion
    assert table["chosen"].sum() == 1 and table.loc[table["chosen"], "trend_df_per_year"].item() == by_hand


def test_the_two_criteria_can_disagree_and_each_is_the_minimum(gap_free):
    by_qaic = airhealth.choose_time_df(gap_free, values=VALUES, criterion="qaic", max_lag=10, **OPTIONS)
    by_pacf = airhealth.choose_time_df(gap_free, values=VALUES, criterion="pacf", max_lag=10, **OPTIONS)
    assert by_qaic.table["qaic"].min() == by_qaic.table.loc[by_qaic.table["chosen"], "qaic"].item()
    assert by_pacf.table["sum_abs_pacf"].min() == by_pacf.table.loc[by_pacf.table["chosen"], "sum_abs_pacf"].item()
    assert by_pacf.max_lag == 10
    assert "chosen by pacf" in by_pacf._repr_html_()


def test_a_candidate_that_cannot_be_fitted_keeps_its_row_and_is_not_chosen(gap_free):
    short = gap_free[gap_free["date"] < "2012-01-01"]
    choice = airhealth.choose_time_df(short, values=[4, 40], max_lag=10, **OPTIONS)
    assert choice.chosen == 4
    assert "days per parameter" in choice.table.loc[1, "error"] and np.isnan(choice.table.loc[1, "qaic"])
    with pytest.raises(FitError, match=r"no candidate df per year could be fitted: .*days per parameter"):
        airhealth.choose_time_df(short, values=[40, 60], max_lag=10, **OPTIONS)


@pytest.mark.parametrize(
    ("changes", "error", "message"),
    [
        ({"values": []}, SpecificationError, r"values must be a non-empty list of values for 'trend_df_per_year'"),
        ({"criterion": "aic"}, SpecificationError, r"criterion"),
        ({"max_lag": 0}, SpecificationError, r"max_lag must be a whole number of days >= 1, got 0"),
        ({"max_lag": 5000}, SpecificationError, r"max_lag=5000 must be at most a quarter of the \d+ days used"),
        ({"seasonality": "fourier"}, SpecificationError, r"needs seasonality='spline'"),
        ({"values": [4, 0]}, SpecificationError, r"trend_df_per_year"),
        ({"outcome": "deaths"}, DataError, r"deaths"),
    ],
)
def test_bad_requests_are_refused(gap_free, changes, error, message):
    with pytest.raises(error, match=message):
        airhealth.choose_time_df(gap_free, **{**OPTIONS, "values": VALUES, **changes})


def test_the_choice_is_read_only(gap_free):
    choice = airhealth.choose_time_df(gap_free, values=[3, 5], max_lag=5, **OPTIONS)
    copy = choice.table
    copy.loc[0, "qaic"] = -1.0
    assert choice.table.loc[0, "qaic"] > 0
    with pytest.raises(AttributeError):
        choice.chosen = 12
