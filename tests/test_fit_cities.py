"""The first stage: each city's row is exactly the single-city fit, on any executor; failures are rows.

Reference: ``airhealth.fit`` on the same city (itself checked against R's glm and statsmodels in
test_against_r.py and test_fit_statsmodels.py) — the first stage must give the same numbers to the last
digit (same code path, tolerance 0) and the same error text.
"""

from __future__ import annotations

import warnings
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth import DataWarning, SpecificationError
from airhealth.cities.simulate_cities import simulate_cities

MODEL = {"outcome": "deaths", "exposure": "pm25", "temperature": "temperature"}


@pytest.fixture(scope="module")
def scenario():
    return simulate_cities(n_cities=4, years=2, seed=5, broken=True)


def quiet_fit(cities, executor="serial", **kw):
    """Fit with the broken city; its warning is expected (and a city's own warnings may come too)."""
    with pytest.warns(DataWarning) as record:
        table = airhealth.fit_cities(cities, executor, show_progress=False, **{**MODEL, **kw})
    assert any("could not be fitted" in str(w.message) for w in record)
    return table


@pytest.mark.parametrize(
    ("lag", "options"),
    [
        ("0-1", {}),
        ("2", {}),
        ("dl0-3", {}),
        ("dl0-5:poly2", {}),
        ("0-1", {"interval": "hac"}),
        ("dl0-2", {"interval": "hac"}),
    ],
)
def test_each_city_row_equals_the_single_city_fit(scenario, lag, options):
    table = quiet_fit(scenario.frames, lag=lag, **options).set_index("city")
    for name, frame in scenario.frames.items():
        if name == scenario.broken_city:
            continue
        with warnings.catch_warnings():  # the city's own warnings are the table's, compared elsewhere
            warnings.simplefilter("ignore")
            single = airhealth.fit(frame, lag=lag, **MODEL, **options)
        e = single.effect(per=10)
        row = table.loc[name]
        assert (row.coef, row.se, row.rr, row.rr_low, row.rr_high) == (e.coef, e.se, e.rr, e.rr_low, e.rr_high)
        assert (row.n_days, row.dispersion, row.error) == (single.n_days, single.dispersion, "")
        if single.spec.lag.is_distributed:
            names = list(single.exposure_columns)
            np.testing.assert_array_equal(row.lag_coefs, single.coef[names].to_numpy())
            np.testing.assert_array_equal(row.lag_cov, single.cov.loc[names, names].to_numpy())
            # the per-lag curve follows from the basis in attrs, as the single fit's lag table
            curve = table.attrs["lag_basis"] @ row.lag_coefs
            np.testing.assert_allclose(curve, single.lag_coefficients().coef, rtol=1e-12)  # same product, rounding


def test_a_broken_city_gets_the_single_fit_message_and_the_run_goes_on(scenario):
    table = quiet_fit(scenario.frames)
    broken = table.set_index("city").loc[scenario.broken_city]
    with pytest.raises(airhealth.DataError) as single:
        airhealth.fit(scenario.frames[scenario.broken_city], **MODEL)
    assert broken.error == str(single.value)
    assert "kelvins" in broken.error
    assert np.isnan(broken.coef) and broken.n_days == 0
    assert (table.error == "").sum() == len(scenario.frames) - 1
    assert list(table.columns) == [
        "city", "coef", "se", "rr", "rr_low", "rr_high", "n_days", "dispersion", "error", "warnings"
    ]  # fmt: skip


def test_the_local_pool_and_another_executor_give_the_serial_numbers(scenario):
    serial = quiet_fit(scenario.frames)
    local = quiet_fit(scenario.frames, None, workers=2)
    with ThreadPoolExecutor(2) as threads:
        threaded = quiet_fit(scenario.frames, threads)
    for other in (local, threaded):
        pd.testing.assert_frame_equal(other, serial)  # exact: the same fit in another process or thread


def test_rr_is_per_the_given_increase_and_level(scenario):
    table = quiet_fit(scenario.frames, per=5, level=0.9)
    row = table.iloc[0]
    e = airhealth.fit(scenario.frames[row.city], **MODEL).effect(per=5, level=0.9)
    assert (row.rr, row.rr_low, row.rr_high) == (e.rr, e.rr_low, e.rr_high)
    assert table.attrs["per"] == 5 and table.attrs["level"] == 0.9


def test_model_options_are_checked_before_any_city_runs(scenario):
    with pytest.raises(SpecificationError, match="unknown model option 'tempreature'"):
        airhealth.fit_cities(scenario.frames, "serial", outcome="deaths", exposure="pm25", tempreature="t")
    with pytest.raises(SpecificationError, match="executor='threads' is not known"):
        airhealth.fit_cities(scenario.frames, "threads", show_progress=False, **MODEL)
    with pytest.raises(SpecificationError, match=r"executor must be a concurrent\.futures\.Executor.*got int"):
        airhealth.fit_cities(scenario.frames, 3, show_progress=False, **MODEL)
    with pytest.raises(SpecificationError, match="retries must be a whole number >= 0, got -1"):
        airhealth.fit_cities(scenario.frames, "serial", retries=-1, show_progress=False, **MODEL)
    with pytest.raises(SpecificationError, match="workers must be a positive whole number, got 0"):
        airhealth.fit_cities(scenario.frames, workers=0, show_progress=False, **MODEL)


def test_city_warnings_are_kept_in_a_column_with_the_single_fit_text(scenario):
    frames = {k: v for k, v in scenario.frames.items() if k != scenario.broken_city}
    name = max(frames, key=lambda k: len(frames[k]))
    gappy = frames[name]["pm25"].where(np.arange(len(frames[name])) % 40 != 0)  # every 40th day missing
    frames[name] = frames[name].assign(pm25=gappy)
    with pytest.warns(DataWarning) as record:  # a short city also fails this lag (too few days per parameter)
        table = airhealth.fit_cities(frames, "serial", show_progress=False, lag="dl0-5", **MODEL)
    assert any(f"cities gave warnings while fitted ({name}" in str(w.message) for w in record)
    with pytest.warns(DataWarning) as single:
        airhealth.fit(frames[name], lag="dl0-5", **MODEL)
    assert table.set_index("city").loc[name, "warnings"] == " | ".join(dict.fromkeys(str(w.message) for w in single))
    assert "leaves" in table.set_index("city").loc[name, "warnings"]


def test_progress_is_shown_on_stderr_unless_quiet(scenario, capsys):
    quiet_fit(scenario.frames)
    assert "fitting cities" not in capsys.readouterr().err
    with pytest.warns(DataWarning):
        airhealth.fit_cities(scenario.frames, "serial", show_progress=True, **MODEL)
    assert "fitting cities" in capsys.readouterr().err


def test_lag_vectors_feed_multivariate_pooling(scenario):
    table = quiet_fit(scenario.frames, lag="dl0-3")
    with pytest.warns(DataWarning, match=f"left out of the lag vectors: {scenario.broken_city}"):
        coefs, covs = airhealth.cities.lag_vectors(table)
    assert coefs.shape == (3, 4) and covs.shape == (3, 4, 4)
    assert list(coefs.index) == [c for c in scenario.frames if c != scenario.broken_city]
    pooled = airhealth.pool_multivariate(coefs, covs, method="mm")
    assert pooled.coef.shape == (4,)
    with pytest.raises(airhealth.DataError, match="fit the cities with a distributed lag"):
        airhealth.cities.lag_vectors(quiet_fit(scenario.frames))
