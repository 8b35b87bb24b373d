"""QAIC of a comparison: each model's own dispersion, and one common dispersion from the largest model.

References (outside the project):
- statsmodels ``GLM(y, X, family=Poisson())`` on the same design matrix and days gives the Poisson
  log-likelihood ``llf`` (fitted with scale 1, so ``llf`` is the plain Poisson log-likelihood) and Pearson's
  chi-squared; the dispersion is ``pearson_chi2 / df_resid``.
- QAIC = -2 log L / c + 2 p (Peng, Dominici & Louis 2006, J R Stat Soc A 169:179-203), with ``c`` each model's
  own dispersion (``qaic``) or one ``c`` from the most general model for all (Burnham & Anderson 2002, Model
  Selection and Multimodel Inference, 2nd ed., section 6.2; ``qaic_common``). Burnham & Anderson count ``c``
  as a parameter too, adding 2 to every model: that constant is left out here, as documented.
The two engines converge to ~1e-10 relative in the coefficients (tol 1e-10 vs statsmodels' 1e-10), so the
log-likelihoods agree to ~1e-9 relative: the tolerance is 1e-8.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm

import airhealth
from airhealth.errors import DataWarning, SpecificationError
from airhealth.studies.compare import compare
from airhealth.studies.qaic import common_qaic

RTOL = 1e-8  # two IRLS implementations at tol 1e-10 (see the module docstring)
OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}
LAGS = ["0", "0-2", "dl0-4"]
DFS = [5, 9]


@pytest.fixture(scope="module")
def three_years():
    data = airhealth.load_sample()
    data = data[data["date"] < "2013-01-01"].reset_index(drop=True)
    data.loc[[50, 51, 600], "pm25"] = np.nan
    return data


@pytest.fixture(scope="module")
def table(three_years):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return compare(three_years, LAGS, trend_df_per_year=DFS, **OPTIONS)


def statsmodels_fits(data, table):
    """One statsmodels Poisson GLM per row, on the design of the single fit restricted to the common days."""
    days = _common_days(data)
    fits = []
    for row in table.to_dict(orient="records"):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            result = airhealth.fit(data, lag=row["lag"], trend_df_per_year=row["trend_df_per_year"], **OPTIONS)
        keep = result.observed.index.isin(days)
        assert keep.sum() == row["n_days"]
        X, y = np.asarray(result.design_matrix)[keep], result.observed.to_numpy()[keep]
        fits.append(sm.GLM(y, X, family=sm.families.Poisson()).fit(tol=1e-12))
    return fits


def _common_days(data):
    sets = []
    for lag in LAGS:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            sets.append(set(airhealth.fit(data, lag=lag, **OPTIONS).observed.index))
    return sorted(set.intersection(*sets))


def test_both_qaic_columns_equal_the_formula_on_statsmodels_fits(three_years, table):
    fits = statsmodels_fits(three_years, table)
    llf = np.array([f.llf for f in fits])
    p = np.array([f.df_model + 1 for f in fits])
    c_own = np.array([f.pearson_chi2 / f.df_resid for f in fits])
    largest = int(np.argmax(p))
    assert (table["lag"][largest], table["trend_df_per_year"][largest]) == ("dl0-4", 9)
    np.testing.assert_allclose(table["n_params"], p)
    np.testing.assert_allclose(table["dispersion"], c_own, rtol=RTOL)
    np.testing.assert_allclose(table["qaic"], -2 * llf / c_own + 2 * p, rtol=RTOL)
    expected = -2 * llf / c_own[largest] + 2 * p
    np.testing.assert_allclose(table["qaic_common"], expected, rtol=RTOL)
    np.testing.assert_allclose(table["delta_qaic_common"], expected - expected.min(), rtol=0, atol=1e-6)


def test_the_table_says_whose_dispersion_is_common(table):
    assert set(table["qaic_common_from"]) == {"lag dl0-4, 9 df/year (51 coefficients)"}
    reference = table.attrs["qaic_common"]
    assert (reference["lag"], reference["trend_df_per_year"], reference["n_params"]) == ("dl0-4", 9, 51)
    largest = table[(table["lag"] == "dl0-4") & (table["trend_df_per_year"] == 9)].iloc[0]
    assert reference["dispersion"] == largest["dispersion"] == table["common_dispersion"].iloc[0]
    assert largest["qaic_common"] == pytest.approx(largest["qaic"], rel=1e-12)  # its own dispersion is the common one
    assert table["delta_qaic_common"].min() == 0.0


def test_ties_for_the_largest_model_take_the_first_row(three_years):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = compare(three_years, ["0", "0-1", "1"], **OPTIONS)
    assert table["n_params"].nunique() == 1
    assert table.attrs["qaic_common"]["lag"] == "0"
    assert table["common_dispersion"].iloc[0] == table["dispersion"].iloc[0]


def test_common_qaic_by_hand():
    # -2 * (-100) / 2 + 2 * 3 = 106 and -2 * (-98) / 2 + 2 * 5 = 108 (the formula in the module docstring)
    np.testing.assert_allclose(common_qaic(np.array([-100.0, -98.0]), np.array([3, 5]), 2.0), [106.0, 108.0])


def test_poisson_models_report_the_aic_in_both_columns(three_years):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = compare(three_years, ["0", "dl0-2"], family="poisson", **OPTIONS)
    np.testing.assert_array_equal(table["qaic_common"], table["qaic"])
    assert set(table["common_dispersion"]) == {1.0}
    assert table["qaic_common_from"].iloc[0].startswith("none: the family has no dispersion")


def test_qaic_on_different_days_warns_and_names_the_day_counts(three_years):
    with pytest.warns(DataWarning) as caught:
        table = compare(three_years, ["0", "0-5"], common_days=False, **OPTIONS)
    low, high = table["n_days"].min(), table["n_days"].max()
    messages = [str(w.message) for w in caught if "different days" in str(w.message)]
    assert messages == [
        f"the models compared use different days ({low} to {high} days, common_days=False): their QAIC values "
        "(qaic, qaic_common) are not comparable; use common_days=True (the default) to choose between them by QAIC."
    ]


def test_no_warning_on_common_days_or_when_the_days_agree(three_years):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        compare(three_years, ["0", "0-5"], **OPTIONS)
        same = compare(three_years, ["0-1", "dl0-1"], common_days=False, **OPTIONS)
    assert same["n_days"].nunique() == 1
    assert not [w for w in caught if "different days" in str(w.message)]


@pytest.mark.parametrize(
    ("options", "message"),
    [
        ({"lags": []}, r"compare needs a list of lag structures"),
        ({"lags": "0-1"}, r"compare needs a list of lag structures"),
        ({"lags": ["0", "0"]}, r"lag '0' is given twice in lags"),
        ({"lags": ["0", "x1"]}, r"'x1'"),
        ({"trend_df_per_year": []}, r"trend_df_per_year is an empty list"),
        ({"trend_df_per_year": [4, "six"]}, r"trend_df_per_year value 'six' is not a number"),
        ({"trend_df_per_year": "7"}, r"trend_df_per_year value '7' is not a number"),
        ({"trend_df_per_year": [4, 0]}, r"trend_df_per_year must be > 0, got 0"),
        ({"trend_df_per_year": [4, -2.5]}, r"trend_df_per_year must be > 0, got -2.5"),
        ({"trend_df_per_year": [4, 4.0]}, r"trend_df_per_year value 4.0 is given twice"),
        ({"trend_df_per_year": [4, 6], "seasonality": "fourier"}, r"trend_df_per_year=\[4, 6\] applies only to"),
        ({"interval": "robust"}, r"interval='robust' is not a valid choice"),
    ],
)
def test_bad_comparison_requests_are_named(three_years, options, message):
    options = {"lags": ["0", "0-1"], **OPTIONS, **options}
    with pytest.raises(SpecificationError, match=message):
        compare(three_years, **options)
