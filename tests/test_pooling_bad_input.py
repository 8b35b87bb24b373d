"""Bad input to pooling gets a clear airhealth error naming the city (or row) and the value, and what to do."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.errors import DataError, DataWarning, SpecificationError


def cities() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "city": ["Norhaven", "Eastport", "Millbrook", "Southvale"],
            "coef": [0.0010, 0.0021, 0.0004, 0.0015],
            "se": [0.0004, 0.0005, 0.0006, 0.0003],
            "temp": [10.0, 14.0, 18.0, 12.0],
        }
    )


def test_fewer_than_two_cities_is_refused():
    with pytest.raises(DataError, match=r"at least two usable cities; got 1 \(Norhaven\)"):
        airhealth.pool(cities().iloc[:1])


def test_too_few_cities_names_those_left_out_for_a_first_stage_error():
    # before, the refusal named only the usable city and the reason the other vanished was lost on the CLI
    table = cities().iloc[:2].assign(error=["", "too few usable days (12) for a model with 40 parameters"])
    with pytest.warns(DataWarning, match="1 city with a message in the 'error' column is left out"):
        with pytest.raises(DataError) as caught:
            airhealth.pool(table)
    assert str(caught.value) == (
        "pooling needs at least two usable cities; got 1 (Norhaven). Left out for a message in the 'error' "
        "column: Eastport (read it there: fix that city's data or model options and fit it again)."
    )


@pytest.mark.parametrize("bad", [0.0, -0.0003, np.nan, np.inf])
def test_zero_negative_or_missing_standard_error_names_the_city_and_value(bad):
    table = cities()
    table.loc[2, "se"] = bad
    with pytest.raises(
        DataError, match=rf"column 'se' must be positive and finite; it is not for Millbrook \({bad!r}\)"
    ):
        airhealth.pool(table)


def test_missing_estimate_names_the_city():
    table = cities()
    table.loc[1, "coef"] = np.nan
    with pytest.raises(DataError, match=r"estimate column 'coef' is missing or infinite for Eastport \(nan\)"):
        airhealth.pool(table)


def test_text_in_the_estimate_column_names_the_row_and_text():
    table = cities().astype({"coef": object})
    table.loc[3, "coef"] = "n/a"
    with pytest.raises(DataError, match=r"holds text that is not a number in rows \[3\] \(first: 'n/a'\)"):
        airhealth.pool(table)


def test_duplicate_city_names_are_refused_with_their_rows():
    table = cities()
    table.loc[3, "city"] = "Eastport"
    with pytest.raises(DataError, match=r"city 'Eastport' appears more than once in column 'city' \(rows \[1, 3\]\)"):
        airhealth.pool(table)


@pytest.mark.parametrize(
    ("option", "column", "what"), [("estimate", "beta", "estimate"), ("se", "stderr", "standard error")]
)
def test_missing_column_is_named_with_the_columns_present(option, column, what):
    with pytest.raises(DataError, match=rf"the {what} column '{column}' is not in the table; its columns are \['city'"):
        airhealth.pool(cities(), **{option: column})


def test_missing_moderator_column_and_missing_moderator_value():
    with pytest.raises(DataError, match=r"moderator column 'altitude' is not in the table"):
        airhealth.pool(cities(), moderators=["altitude"])
    table = cities()
    table.loc[0, "temp"] = np.nan
    with pytest.raises(DataError, match=r"moderator 'temp' is missing for Norhaven \(nan\)"):
        airhealth.pool(table, moderators=["temp"])


def test_constant_moderator_is_refused():
    table = cities().assign(country=1.0)
    with pytest.raises(SpecificationError, match=r"moderators \['country'\] are constant or collinear"):
        airhealth.pool(table, moderators=["country"])


def test_too_many_moderators_for_the_cities():
    table = cities().iloc[:3].assign(other=[1.0, 5.0, 2.0])
    with pytest.raises(DataError, match=r"3 cities cannot estimate 3 coefficients \(intercept, temp, other\)"):
        airhealth.pool(table, moderators=["temp", "other"])


def test_bad_method_level_and_per_are_named():
    with pytest.raises(
        SpecificationError, match=r"method='pm' is not a valid choice; use one of 'reml', 'dl', 'fixed'"
    ):
        airhealth.pool(cities(), method="pm")
    with pytest.raises(SpecificationError, match=r"confidence level must be between 0 and 1, got 95"):
        airhealth.pool(cities(), level=95)
    with pytest.raises(SpecificationError, match=r"per must be a positive number of exposure units, got -10"):
        airhealth.pool(cities(), per=-10)


def test_not_a_table_is_refused():
    with pytest.raises(DataError, match=r"estimates must be a pandas DataFrame with one row per city, got list"):
        airhealth.pool([0.001, 0.002])


def test_cities_whose_first_stage_failed_are_left_out_with_a_warning():
    table = cities().assign(error=["", "no events in the period", None, ""])
    with pytest.warns(DataWarning, match=r"1 city with a message in the 'error' column is left out .*: Eastport"):
        result = airhealth.pool(table)
    assert result.labels == ("Norhaven", "Millbrook", "Southvale")
    assert result.coef == pytest.approx(airhealth.pool(table.drop(index=1).drop(columns="error")).coef, rel=1e-12)


# ---------------------------------------------------------------------------------------- multivariate
def vectors() -> tuple[np.ndarray, list[np.ndarray]]:
    coefs = np.array([[0.1, 0.2], [0.3, 0.1], [0.2, 0.4], [0.0, 0.3]])
    covs = [np.array([[0.01, 0.002], [0.002, 0.02]])] * 4
    return coefs, covs


def test_vectors_of_different_lengths_are_refused():
    _, covs = vectors()
    with pytest.raises(DataError, match=r"city 0 has 2, city 2 has 3; every city must give the same coefficients"):
        airhealth.pool_multivariate([[0.1, 0.2], [0.3, 0.1], [0.2, 0.4, 0.5], [0.0, 0.3]], covs)


def test_covariance_count_and_shape_must_match_the_vectors():
    coefs, covs = vectors()
    with pytest.raises(DataError, match=r"got 4 coefficient vectors but 3 covariance matrices"):
        airhealth.pool_multivariate(coefs, covs[:3])
    with pytest.raises(DataError, match=r"the covariance of city 1 has shape \(3, 3\); it must be 2×2"):
        airhealth.pool_multivariate(coefs, [covs[0], np.eye(3), covs[0], covs[0]])


def test_non_symmetric_covariance_names_the_city():
    coefs, covs = vectors()
    bad = np.array([[0.01, 0.003], [0.002, 0.02]])
    with pytest.raises(DataError, match=r"covariance of city 2 is not symmetric \(largest difference 0.001\)"):
        airhealth.pool_multivariate(coefs, [covs[0], covs[0], bad, covs[0]])


def test_non_positive_definite_covariance_names_the_city_and_eigenvalue():
    coefs, covs = vectors()
    bad = np.array([[0.01, 0.02], [0.02, 0.01]])  # eigenvalues 0.03 and -0.01
    with pytest.raises(DataError, match=r"covariance of city 3 is not positive definite \(smallest eigenvalue -0.01\)"):
        airhealth.pool_multivariate(coefs, [covs[0], covs[0], covs[0], bad])


def test_missing_coefficient_names_city_and_coefficient():
    _, covs = vectors()
    table = pd.DataFrame({"lag0": [0.1, 0.3, np.nan, 0.0], "lag1": [0.2, 0.1, 0.4, 0.3]}, index=list("ABCD"))
    with pytest.raises(
        DataError, match=r"coefficient 'lag0' of city 'C' is nan; every city needs all its coefficients"
    ):
        airhealth.pool_multivariate(table, covs)


def test_multivariate_needs_two_cities_and_a_valid_method():
    coefs, covs = vectors()
    with pytest.raises(DataError, match=r"at least two usable cities; got 1"):
        airhealth.pool_multivariate(coefs[:1], covs[:1])
    with pytest.raises(SpecificationError, match=r"method='ml' is not a valid choice; use one of 'reml', 'mm'"):
        airhealth.pool_multivariate(coefs, covs, method="ml")


def test_duplicate_city_labels_in_the_multivariate_table():
    _, covs = vectors()
    table = pd.DataFrame({"lag0": [0.1, 0.3, 0.2, 0.0], "lag1": [0.2, 0.1, 0.4, 0.3]}, index=list("ABCA"))
    with pytest.raises(DataError, match=r"duplicate city labels in its index"):
        airhealth.pool_multivariate(table, covs)


def test_predict_needs_every_moderator_and_finite_values():
    result = airhealth.pool(cities(), moderators=["temp"])
    message = r"value for every moderator of the model \['temp'\]; missing \['temp'\], not in the model \['altitude'\]"
    with pytest.raises(SpecificationError, match=message):
        result.predict({"altitude": 3})
    with pytest.raises(SpecificationError, match=r"must be finite numbers"):
        result.predict({"temp": [10.0, np.nan]})
    with pytest.raises(SpecificationError, match=r"different lengths"):
        airhealth.pool(cities().assign(alt=[1.0, 2.0, 5.0, 3.0]), moderators=["temp", "alt"]).predict(
            {"temp": [1.0, 2.0], "alt": [1.0]}
        )


def test_multivariate_messages_name_the_city_by_its_name():
    # review defect: messages said "city 0" even for named cities
    coefs, covs = vectors()
    bad = np.array([[0.01, 0.02], [0.02, 0.01]])
    table = pd.DataFrame(coefs, columns=["lag0", "lag1"], index=["Norhaven", "Eastport", "Millbrook", "Southvale"])
    with pytest.raises(DataError, match=r"covariance of city 'Southvale' is not positive definite"):
        airhealth.pool_multivariate(table, [covs[0], covs[0], covs[0], bad])
    names = ["Norhaven", "Eastport", "Millbrook", "Southvale"]
    with pytest.raises(DataError, match=r"city 'Norhaven' has 2, city 'Millbrook' has 3; every city must give"):
        airhealth.pool_multivariate([[0.1, 0.2], [0.3, 0.1], [0.2, 0.4, 0.5], [0.0, 0.3]], covs, cities=names)
    with pytest.raises(DataError, match=r"got 4 coefficient vectors but 3 city names in cities="):
        airhealth.pool_multivariate(coefs, covs, cities=names[:3])
    assert airhealth.pool_multivariate(coefs, covs, cities=names).labels == tuple(names)
