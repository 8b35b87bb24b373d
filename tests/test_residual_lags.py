"""Lagged deviance residuals as covariates (``residual_lags``; Brumback et al. 2000, J Am Stat Assoc 95:16–27).

Reference 1: base R ``glm(family = quasipoisson)`` fitted twice by ``tests/reference/residual_lags_reference.R``
(invocation in its header; frozen in ``residual_lags_reference.json``, run live when Rscript exists) on the
complete simulated city of ``make_diagnostics_input.py`` with four exposure days made missing in R: the
residuals, their lags on the calendar and the second fit are built in R alone. Tolerance 1e-6 relative on
coefficients and standard errors: ``summary.glm`` computes the dispersion with the IRLS weights from the start
of the last iteration (see test_against_r.py); days used exactly.

Reference 2: statsmodels ``GLM(family=Poisson)`` with ``scale="X2"`` (quasi-Poisson: Pearson χ² / residual df)
fitted twice on the same design: first without the residual terms, then with that fit's deviance residuals
(``resid_deviance``) at lags 1..k, placed on the calendar (a day's lag-j residual is the residual of the
day j calendar days earlier, missing when that day was not used), on the days where every lag exists.
Tolerance: 1e-6 relative on coefficients and standard errors (both programs converge to 1e-10 on the
deviance; the residuals feeding the second fit carry that error, amplified at most modestly) — a residual
shifted by one day or a day kept without its lagged residual moves the estimate in the 3rd digit.
"""

from __future__ import annotations

import json
import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from conftest import run_r_reference

import airhealth
from airhealth.cli.main import main as cli_main
from airhealth.errors import SpecificationError
from airhealth.model.fitting import RESIDUAL_LAG_MISSING

OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature", "lag": "0-1"}
REFERENCE_DIR = Path(__file__).resolve().parent / "reference"
sys.path.insert(0, str(REFERENCE_DIR))
from make_diagnostics_input import complete_city, write_input  # noqa: E402

FROZEN = json.loads((REFERENCE_DIR / "residual_lags_reference.json").read_text())


@pytest.fixture(scope="module")
def r_city_fit():
    city = complete_city()
    city.loc[[299, 300, 301, 699], "pm25"] = np.nan  # R's rows 300-302 and 700
    return airhealth.fit(city, outcome="deaths_all", exposure="pm25", lag="0", temperature="temperature",
                         residual_lags=2)  # fmt: skip


def check_against_r(result, ref):
    assert result.n_days == ref["n_used"] and str(result.fitted.index[0].date()) == ref["first_day"]
    names = {"pm25": "pm25[0]", "r1": "deviance residual lag 1", "r2": "deviance residual lag 2"}
    for key, name in names.items():
        assert result.coef[name] == pytest.approx(ref["coef"][key], rel=1e-6), key
        assert result.std_err[name] == pytest.approx(ref["se"][key], rel=1e-6), key
    assert result.dispersion == pytest.approx(ref["dispersion"], rel=1e-6)
    assert result.deviance == pytest.approx(ref["deviance"], rel=1e-9)


def test_residual_lags_equal_frozen_r(r_city_fit):
    check_against_r(r_city_fit, FROZEN)


@pytest.mark.needs_r
def test_residual_lags_equal_live_r(r_city_fit, rscript, tmp_path):
    data = write_input(tmp_path / "input.csv")
    live = run_r_reference(rscript, REFERENCE_DIR / "residual_lags_reference.R", data, out=tmp_path / "out.json")
    check_against_r(r_city_fit, live)
    for key in ("coef", "se"):
        for name, value in FROZEN[key].items():
            assert live[key][name] == pytest.approx(value, rel=1e-9), (key, name)  # the frozen file is current


@pytest.fixture(scope="module")
def four_years():
    data = airhealth.load_sample()
    data = data[data["date"] < "2014-01-01"].reset_index(drop=True)
    data.loc[[300, 301, 302, 900], "pm25"] = np.nan  # gaps: residual lags are lost after each
    return data


def _statsmodels_transitional(plain: airhealth.FitResult, k: int) -> tuple[sm.GLM, pd.DatetimeIndex]:
    x = plain.design_matrix
    y = plain.observed.to_numpy()
    first = sm.GLM(y, x.to_numpy(), family=sm.families.Poisson()).fit(scale="X2", tol=1e-12)
    calendar = pd.date_range(x.index[0], x.index[-1], freq="D")
    residual = pd.Series(first.resid_deviance, index=x.index).reindex(calendar)
    lags = pd.concat({f"r{j}": residual.shift(j) for j in range(1, k + 1)}, axis=1).reindex(x.index)
    keep = lags.notna().all(axis=1).to_numpy()
    design = np.hstack([x.to_numpy()[keep], lags.to_numpy()[keep]])
    second = sm.GLM(y[keep], design, family=sm.families.Poisson()).fit(scale="X2", tol=1e-12)
    return second, x.index[keep]


def test_residual_lags_equal_statsmodels_on_the_same_design(four_years):
    k = 2
    two_years = four_years[four_years["date"] < "2012-01-01"]  # with the gaps of days 300-302
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        plain = airhealth.fit(two_years, **OPTIONS)
        result = airhealth.fit(two_years, residual_lags=k, **OPTIONS)
    reference, days = _statsmodels_transitional(plain, k)
    assert result.n_days == len(days) and (result.fitted.index == days).all()
    names = [f"deviance residual lag {j}" for j in range(1, k + 1)]
    assert list(result.coef.index[-1 - k : -1]) == names  # after the confounders, before the exposure
    p = len(plain.coef)
    order = [*range(p - 1), *range(p, p + k), p - 1]  # statsmodels design: plain columns, then the lags
    np.testing.assert_allclose(result.coef.to_numpy(), reference.params[order], rtol=1e-6, atol=1e-10)
    np.testing.assert_allclose(result.std_err.to_numpy(), reference.bse[order], rtol=1e-6)
    assert result.dispersion == pytest.approx(reference.scale, rel=1e-6)


def test_days_without_a_lagged_residual_are_dropped_with_a_reason(four_years):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        plain = airhealth.fit(four_years, **OPTIONS)
        result = airhealth.fit(four_years, residual_lags=2, **OPTIONS)
    lost = result.dropped[result.dropped["reason"] == RESIDUAL_LAG_MISSING]["date"]
    assert len(lost) == plain.n_days - result.n_days
    # the first two days used, and the two days after each gap of the days used
    used = pd.Series(1, index=plain.fitted.index).reindex(pd.date_range(plain.fitted.index[0], "2013-12-31"))
    after_gap = used.notna() & (used.shift(1).isna() | used.shift(2).isna())
    assert set(lost) == set(used.index[after_gap.to_numpy()])
    assert result.dropped["date"].is_monotonic_increasing
    record = result.to_dict()
    assert record["residual_lags"] == 2 and "residual_lags" not in plain.to_dict()
    assert any("lags 1-2 entered as covariates (Brumback et al. 2000)" in n for n in record["notes"])


def test_residual_partial_autocorrelation_at_lag_one_drops_on_ar1_errors():
    """Simulated counts whose log-rate has AR(1) noise (φ = 0.6): the residual PACF at lag 1 of the plain
    model is well outside the white-noise band; with one lagged residual it falls inside it."""
    rng = np.random.default_rng(20260101)
    n = 4 * 365
    noise = np.zeros(n)
    for t in range(1, n):
        noise[t] = 0.6 * noise[t - 1] + rng.normal(0, 0.08)
    days = pd.date_range("2015-01-01", periods=n, freq="D")
    season = 0.15 * np.cos(2 * np.pi * np.arange(n) / 365.25)
    data = pd.DataFrame({
        "date": days, "pm25": rng.gamma(4.0, 5.0, n),
        "deaths_all": rng.poisson(60 * np.exp(season + noise)),
    })  # fmt: skip
    options = {"outcome": "deaths_all", "exposure": "pm25", "lag": "0", "trend_df_per_year": 4, "day_of_week": False}
    before = airhealth.diagnose(airhealth.fit(data, **options), max_lag=5)
    after = airhealth.diagnose(airhealth.fit(data, residual_lags=1, **options), max_lag=5)
    lag1_before = before.autocorrelation["pacf"].iloc[0]
    lag1_after = after.autocorrelation["pacf"].iloc[0]
    assert lag1_before > 3 * before.band  # the AR(1) noise shows
    assert abs(lag1_after) < after.band < lag1_before


@pytest.mark.parametrize("bad", [-1, 1.5, True, 31, "2"])
def test_residual_lags_must_be_a_small_whole_number(bad):
    with pytest.raises(SpecificationError, match=r"residual_lags must be a whole number from 0 \(none\) to 30, got"):
        airhealth.ModelSpec(outcome="y", exposure="x", residual_lags=bad)


def test_command_line_option_residual_lags(four_years, tmp_path, capsys):
    path = tmp_path / "daily.csv"
    four_years.to_csv(path, index=False)
    code = cli_main(["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25", "--temperature",
                     "temperature", "--residual-lags", "2", "--json"])  # fmt: skip
    assert code == 0
    import json

    record = json.loads(capsys.readouterr().out)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        reference = airhealth.fit(four_years, residual_lags=2, **OPTIONS)
    assert record["residual_lags"] == 2
    assert record["coef"] == pytest.approx(reference.to_dict()["coef"], rel=1e-10)


def test_methods_text_names_the_residual_terms():
    from airhealth.report.city_report import describe_model

    spec = airhealth.ModelSpec(outcome="y", exposure="x", residual_lags=2)
    assert "deviance residuals of a first fit at lags 1–2" in describe_model(spec, 1000)
    assert "deviance residuals" not in describe_model(spec.replace(residual_lags=0), 1000)
    assert "first fit at lag 1 (a transitional model" in describe_model(spec.replace(residual_lags=1), 1000)


def test_compare_and_sweep_fit_the_residual_terms_as_a_single_fit_does(four_years):
    from airhealth.studies.sweep import sweep

    options = {**OPTIONS, "residual_lags": 1}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = airhealth.compare(
            four_years, ["0", "0-1"], common_days=False, **{k: v for k, v in options.items() if k != "lag"}
        )
        swept = sweep(four_years, "trend_df_per_year", [5], **options)
        for lag, row in zip(["0", "0-1"], table.to_dict(orient="records"), strict=True):
            reference = airhealth.fit(four_years, **{**options, "lag": lag}).to_dict()
            assert row["coef"] == pytest.approx(reference["coef"], rel=1e-8) and row["n_days"] == reference["n_days"]
        reference = airhealth.fit(four_years, trend_df_per_year=5, **options).to_dict()
    assert swept.loc[0, "coef"] == pytest.approx(reference["coef"], rel=1e-8)
    assert swept.loc[0, "se"] == pytest.approx(reference["se"], rel=1e-8)
