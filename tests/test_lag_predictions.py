"""Predictions from fitted lag terms: per-lag and cumulative effects with B V Bᵀ intervals, exposure–response
curves against a reference, and the exposure of lowest cumulative risk."""

from __future__ import annotations

import json
import warnings

import numpy as np
import pandas as pd
import pytest

from airhealth.errors import AirhealthWarning, DataWarning, SpecificationError
from airhealth.model.bases.exposure_lag import ExposureLagBasis, ExposureLagTerm, LinearResponse, SplineResponse
from airhealth.model.fitting import fit
from airhealth.model.lag_predictions import (
    exposure_response,
    find_lag_term,
    lag_response,
    minimum_risk_exposure,
)
from airhealth.simulate import MINIMUM_MORTALITY_TEMPERATURE

Z95 = 1.959963984540054
TEMPERATURE_TERM = ExposureLagTerm("temperature", SplineResponse(df=4), "dl0-21:spline4")


@pytest.fixture(scope="module")
def dl_fit(_sample_once):
    return fit(_sample_once, "deaths_all", "pm25", lag="dl0-21:spline4", temperature="temperature")


@pytest.fixture(scope="module")
def temperature_confounder_fit(_sample_once):
    return fit(_sample_once, "deaths_all", "pm25", lag="dl0-5", confounders=[TEMPERATURE_TERM])


@pytest.fixture(scope="module")
def temperature_exposure_fit(_sample_once):
    lag = ExposureLagBasis(SplineResponse(df=4), "dl0-21:spline4")
    return fit(_sample_once, "deaths_all", "temperature", lag=lag)


# --------------------------------------------------------------------------- linear distributed lags


@pytest.mark.filterwarnings("ignore:exposure .* leaves:airhealth.errors.DataWarning")  # long lags lose days by design
def test_linear_cumulative_and_per_lag_effects_match_the_result(dl_fit):
    cum = exposure_response(dl_fit, values=[10.0], reference=0.0).iloc[0]
    e = dl_fit.effect(per=10)
    assert cum["rr"] == pytest.approx(e.rr, rel=1e-12)
    assert cum["rr_low"] == pytest.approx(e.rr_low, rel=1e-12)
    assert cum["se"] == pytest.approx(10 * e.se, rel=1e-12)
    per_lag = exposure_response(dl_fit, values=[10.0], per_lag=True)
    table = dl_fit.lag_effects(per=10)
    np.testing.assert_allclose(per_lag["rr"], table["rr"], rtol=1e-12)
    np.testing.assert_allclose(per_lag["rr_high"], table["rr_high"], rtol=1e-12)
    assert per_lag["lag"].tolist() == list(range(22))
    pd.testing.assert_frame_equal(lag_response(dl_fit, per=10), table)


def test_cumulative_se_is_the_b_v_bt_form(dl_fit):
    # Delta method for a linear combination (exact here): var(1ᵀ C θ) = (Cᵀ1)ᵀ V (Cᵀ1).
    cols = list(dl_fit.exposure_columns)
    v = dl_fit.cov.loc[cols, cols].to_numpy()
    c = dl_fit.spec.lag.basis()
    w = c.sum(axis=0)
    row = exposure_response(dl_fit, values=[1.0], reference=0.0).iloc[0]
    assert row["se"] == pytest.approx(np.sqrt(w @ v @ w), rel=1e-12)
    assert row["rr_high"] == pytest.approx(np.exp(row["coef"] + Z95 * row["se"]), rel=1e-12)
    per_lag = exposure_response(dl_fit, values=[1.0], reference=0.0, per_lag=True)
    np.testing.assert_allclose(per_lag["se"], np.sqrt(np.diag(c @ v @ c.T)), rtol=1e-12)
    assert per_lag["coef"].sum() == pytest.approx(row["coef"], rel=1e-12)


def test_json_record_of_a_distributed_lag(dl_fit):
    record = json.loads(json.dumps(dl_fit.to_dict(per=10)))
    assert len(record["lags"]) == 22
    assert set(record["lags"][0]) == {"lag", "coef", "se", "rr", "rr_low", "rr_high"}
    assert set(record["cumulative"]) == {"coef", "se", "rr", "rr_low", "rr_high"}
    for key in ("coef", "se", "rr", "rr_low", "rr_high"):
        assert record[key] == record["cumulative"][key]
    assert record["rr"] == pytest.approx(np.exp(10 * sum(row["coef"] for row in record["lags"])), rel=1e-9)


def test_linear_term_without_a_recorded_range_needs_explicit_values(dl_fit):
    with pytest.raises(SpecificationError, match=r"does not record the observed exposure range"):
        minimum_risk_exposure(dl_fit)
    with pytest.raises(SpecificationError, match=r"does not record the observed exposure range"):
        exposure_response(dl_fit)  # no values= and no recorded range to make a grid from


# ------------------------------------------------------------------------------- non-linear terms


def test_non_linear_per_lag_effects_add_up_to_the_cumulative_one(temperature_exposure_fit):
    values = [-5.0, 0.0, 25.0]
    cum = exposure_response(temperature_exposure_fit, values=values, reference=19.0)
    per_lag = exposure_response(temperature_exposure_fit, values=values, reference=19.0, per_lag=True)
    assert len(per_lag) == 3 * 22
    sums = per_lag.groupby("exposure")["coef"].sum()
    np.testing.assert_allclose(sums.loc[values].to_numpy(), cum["coef"].to_numpy(), rtol=1e-12)


def test_non_linear_cumulative_se_by_hand(temperature_exposure_fit):
    # b = (f(x) - f(r)) ⊗ Cᵀ1, var = b V bᵀ (Gasparrini, Armstrong & Kenward 2010).
    res = temperature_exposure_fit
    basis = res.spec.lag
    f = basis.response.spline.evaluate(np.array([25.0, 19.0]))
    b = np.kron(f[0] - f[1], basis.lag.basis().sum(axis=0))
    cols = list(res.exposure_columns)
    theta, v = res.coef[cols].to_numpy(), res.cov.loc[cols, cols].to_numpy()
    row = exposure_response(res, values=[25.0], reference=19.0).iloc[0]
    assert row["coef"] == pytest.approx(b @ theta, rel=1e-12)
    assert row["se"] == pytest.approx(np.sqrt(b @ v @ b), rel=1e-12)
    at_ref = exposure_response(res, values=[19.0], reference=19.0).iloc[0]
    assert at_ref["coef"] == 0 and at_ref["se"] == 0 and at_ref["rr"] == 1


def test_default_reference_is_the_minimum_and_the_curve_lies_above_it(temperature_exposure_fit):
    curve = exposure_response(temperature_exposure_fit)
    assert len(curve) == 100
    assert (curve["coef"] >= -1e-12).all()
    mmt = minimum_risk_exposure(temperature_exposure_fit)
    assert curve["exposure"].min() == pytest.approx(-9.4) and curve["exposure"].max() == pytest.approx(27.1)
    assert mmt.low <= mmt.exposure <= mmt.high
    assert "not significantly above" in mmt.note


@pytest.mark.parametrize("fixture", ["temperature_confounder_fit", "temperature_exposure_fit"])
def test_minimum_mortality_temperature_of_the_sample(request, fixture):
    # The Norhaven simulator's documented truth (airhealth.simulate.MINIMUM_MORTALITY_TEMPERATURE = 19 °C):
    # heat above 19 °C at lags 0-1, cold below 19 °C over lags 0-13. Tolerance 1.5 °C: a 4-df spline and
    # 14 years of data place the minimum to about a degree (the band of flat risk is several degrees wide).
    res = request.getfixturevalue(fixture)
    term = "temperature" if fixture == "temperature_confounder_fit" else None
    mmt = minimum_risk_exposure(res, term=term)
    assert mmt.exposure == pytest.approx(MINIMUM_MORTALITY_TEMPERATURE, abs=1.5)
    assert not mmt.at_boundary
    assert 60 < mmt.percentile < 95
    assert mmt.low < MINIMUM_MORTALITY_TEMPERATURE < mmt.high
    # cold is harmful: -5 °C against the minimum, cumulated over 22 days, raises deaths
    cold = exposure_response(res, values=[-5.0], reference=mmt.exposure, term=term).iloc[0]
    assert cold["rr_low"] > 1.1


def test_minimum_within_a_narrower_range(temperature_exposure_fit):
    mmt = minimum_risk_exposure(temperature_exposure_fit, within=(0.0, 10.0))
    assert mmt.exposure == pytest.approx(10.0)  # risk falls towards 19 °C, so the edge of 0-10 °C
    assert mmt.at_boundary and "edge of the range" in mmt.note
    with pytest.raises(SpecificationError, match=r"range limit 40 is outside the observed range"):
        minimum_risk_exposure(temperature_exposure_fit, within=(0.0, 40.0))


def test_simulated_u_shape_minimum_is_found():
    # Invented data: log rate = 0.004 (T - 16)² on the same day and 0.002 (T - 16)² the next day; true
    # minimum 16 °C. Tolerance 1 °C for 6 years of ~40 deaths a day.
    rng = np.random.default_rng(11)
    n = 6 * 365
    day = np.arange(n + 1)
    temp = np.round(11 - 8 * np.cos(2 * np.pi * (day - 20) / 365.25) + 3 * rng.standard_normal(n + 1), 1)
    effect = 0.004 * (temp[1:] - 16) ** 2 + 0.002 * (temp[:-1] - 16) ** 2
    y = rng.poisson(40 * np.exp(effect - effect.mean()))
    frame = pd.DataFrame({"date": pd.date_range("2012-01-01", periods=n), "deaths": y, "t": temp[1:]})
    res = fit(frame, "deaths", "t", lag=ExposureLagBasis(SplineResponse(df=4), "dl0-3"), trend_df_per_year=2)
    assert minimum_risk_exposure(res).exposure == pytest.approx(16.0, abs=1.0)


def test_lag_response_of_a_non_linear_term(temperature_confounder_fit):
    heat = lag_response(temperature_confounder_fit, value=26.0, reference=19.0, term="temperature")
    assert list(heat.columns) == ["lag", "coef", "se", "rr", "rr_low", "rr_high"]
    assert len(heat) == 22
    assert heat["rr"].iloc[0] > heat["rr"].iloc[10]  # heat acts at short lags
    with pytest.raises(SpecificationError, match=r"give the exposure value"):
        lag_response(temperature_confounder_fit, term="temperature")


# ---------------------------------------------------------------------------------------- bad input


def test_reference_outside_the_exposure_range_is_refused(temperature_confounder_fit):
    with pytest.raises(SpecificationError, match=r"reference value 40 is outside the observed range of 'temperature'"):
        exposure_response(temperature_confounder_fit, values=[25.0], reference=40.0, term="temperature")
    with pytest.raises(SpecificationError, match=r"reference exposure must be a finite number"):
        exposure_response(temperature_confounder_fit, values=[25.0], reference=float("nan"), term="temperature")


def test_exposure_values_outside_the_range_warn(temperature_confounder_fit):
    with pytest.warns(DataWarning, match=r"outside the observed range of 'temperature'.*extrapolation"):
        exposure_response(temperature_confounder_fit, values=[35.0], reference=19.0, term="temperature")
    with warnings.catch_warnings():
        # airhealth's warnings only: a library's deprecation notice is not a failure here
        warnings.simplefilter("error", AirhealthWarning)
        exposure_response(temperature_confounder_fit, values=[25.0], reference=19.0, term="temperature")


def test_unknown_term_lists_the_exposure_lag_terms(temperature_confounder_fit):
    with pytest.raises(SpecificationError, match=r"no exposure-lag terms matching 'humidity'.*temperature\[spline"):
        find_lag_term(temperature_confounder_fit, "humidity")
    assert find_lag_term(temperature_confounder_fit, TEMPERATURE_TERM).exposure == "temperature"


@pytest.mark.parametrize(
    ("kwargs", "words"),
    [
        ({"values": []}, "values must be one or more finite exposure values"),
        ({"values": [np.nan]}, "values must be one or more finite exposure values"),
        ({"values": [10.0], "level": 1.5}, "confidence level"),
    ],
)
def test_bad_prediction_arguments(temperature_exposure_fit, kwargs, words):
    with pytest.raises(SpecificationError, match=words):
        exposure_response(temperature_exposure_fit, **kwargs)


def test_linear_exposure_lag_basis_records_the_range_for_minimum_and_reference(sample):
    res = fit(sample, "deaths_all", "pm25", lag=ExposureLagBasis(LinearResponse(), "dl0-5"), temperature="temperature")
    low = res.spec.lag.response.summary.low
    assert minimum_risk_exposure(res).exposure == pytest.approx(low if res.exposure_coef > 0 else 70.2)
    with pytest.raises(SpecificationError, match=r"reference value 500 is outside the observed range of 'pm25'"):
        exposure_response(res, values=[10.0], reference=500.0)


# ------------------------------------------------------------------------------- plots and section


def _band_limits(band, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper edge of a fill_between band at each x (from the polygon's vertices)."""
    verts = band.get_paths()[0].vertices
    at_x = [verts[np.isclose(verts[:, 0], v), 1] for v in x]
    return np.array([ys.min() for ys in at_x]), np.array([ys.max() for ys in at_x])


def test_lag_response_plot_draws_the_band_and_curve(dl_fit):
    from airhealth.report.lag_plots import plot_lag_response

    ax = plot_lag_response(dl_fit, per=10)
    table = dl_fit.lag_effects(per=10)
    line = ax.get_lines()[0]
    np.testing.assert_array_equal(line.get_xdata(), np.arange(22))
    np.testing.assert_allclose(line.get_ydata(), table["rr"], rtol=1e-12)
    assert len(ax.collections) == 1  # the interval band
    low, high = _band_limits(ax.collections[0], np.arange(22))
    np.testing.assert_allclose(low, table["rr_low"], rtol=1e-12)
    np.testing.assert_allclose(high, table["rr_high"], rtol=1e-12)
    assert ax.get_lines()[1].get_ydata()[0] == 1.0  # the RR = 1 reference line
    assert ax.get_xlabel() == "lag (days)" and ax.get_ylabel() == "RR per 10 µg/m³"  # the fit's unit


def test_exposure_response_plot_marks_the_minimum_and_shows_the_distribution(temperature_confounder_fit):
    from matplotlib.figure import Figure

    from airhealth.report.lag_plots import plot_exposure_response

    fig = Figure()
    ax = fig.add_subplot()
    out = plot_exposure_response(temperature_confounder_fit, term="temperature", ax=ax)
    assert out is ax
    mmt = minimum_risk_exposure(temperature_confounder_fit, term="temperature")
    expected = exposure_response(temperature_confounder_fit, term="temperature")  # same default grid and reference
    curve, band, minimum = ax.get_lines()[0], ax.collections[0], ax.get_lines()[2]
    np.testing.assert_allclose(curve.get_xdata(), expected["exposure"], rtol=1e-12)
    np.testing.assert_allclose(curve.get_ydata(), expected["rr"], rtol=1e-12)
    assert curve.get_ydata().min() == pytest.approx(1.0, abs=1e-4)  # 100-point curve vs 400-point search
    low, high = _band_limits(band, expected["exposure"].to_numpy())
    np.testing.assert_allclose(low, expected["rr_low"], rtol=1e-12)
    np.testing.assert_allclose(high, expected["rr_high"], rtol=1e-12)
    assert minimum.get_xdata()[0] == pytest.approx(mmt.exposure)
    strip = ax.child_axes  # the exposure distribution: a strip shaded by days per bin
    assert len(strip) == 1
    counts = np.asarray(find_lag_term(temperature_confounder_fit, "temperature").summary.counts, dtype=float)
    np.testing.assert_allclose(np.ravel(strip[0].collections[0].get_array()), counts / counts.max())
    assert sum(counts) == 5113
    assert ax.get_xlabel() == "temperature (°C)"


def test_surface_plots(temperature_exposure_fit):
    from airhealth.report.lag_plots import plot_exposure_lag_surface

    ax = plot_exposure_lag_surface(temperature_exposure_fit, reference=19.0, n_exposure=30)
    assert ax.get_ylabel() == "temperature (°C)" and len(ax.figure.axes) == 2  # contour and colour bar
    summary = temperature_exposure_fit.spec.lag.response.summary
    grid = np.linspace(summary.low, summary.high, 30)
    rr = exposure_response(temperature_exposure_fit, values=grid, reference=19.0, per_lag=True)["rr"].to_numpy()
    filled, one = ax.collections[0], ax.collections[1]
    levels = np.asarray(filled.levels)
    assert levels.size >= 10  # about 21 filled levels (matplotlib rounds them)
    assert levels.min() <= rr.min() and levels.max() >= rr.max()  # the levels span the surface values
    assert levels[1] > rr.min() and levels[-2] < rr.max()  # and not much more
    np.testing.assert_array_equal(one.levels, [1.0])  # the RR = 1 contour
    ax3d = plot_exposure_lag_surface(temperature_exposure_fit, reference=19.0, kind="surface", n_exposure=20)
    assert ax3d.name == "3d"
    z = ax3d.collections[0].get_array()  # face colours come from the RR values of the 19 × 21 facets
    assert z is not None and z.size == 19 * 21
    assert z.min() >= rr.min() - 1e-9 and z.max() <= rr.max() + 1e-9
    with pytest.raises(SpecificationError, match="kind"):
        plot_exposure_lag_surface(temperature_exposure_fit, kind="mesh")


def test_lag_structure_section(sample):
    from airhealth.model.bases.distributed_lags import SplineLag
    from airhealth.report.document import Figure, Table, Text
    from airhealth.report.lag_section import lag_structure_section
    from airhealth.report.numbers import rr_decimals

    section = lag_structure_section(sample, "deaths_all", "pm25", temperature="temperature")
    assert section.title == "Lag structures"
    tables = {b.name: b for b in section.blocks if isinstance(b, Table)}
    figures = {b.name: b for b in section.blocks if isinstance(b, Figure)}
    comparison = tables["lag_structures"].frame
    assert comparison["lag"].tolist() == ["0", "1", "2", "3", "4", "5", "dl0-5", "dl0-21:spline4"]
    assert (comparison["kind"] == "distributed lag (cumulative)").sum() == 2
    dl5 = fit(sample, "deaths_all", "pm25", lag="dl0-5", temperature="temperature")
    e = dl5.effect(per=10)
    assert comparison["RR (95% CI)"].iloc[6] == f"{e.rr:.3f} ({e.rr_low:.3f} to {e.rr_high:.3f})"
    per_lag = tables["lag_effects"].frame
    assert per_lag["lag_structure"].value_counts().to_dict() == {"dl0-21:spline4": 22, "dl0-5": 6}
    np.testing.assert_allclose(
        per_lag.loc[per_lag["lag_structure"] == "dl0-5", "rr"], dl5.lag_effects(10)["rr"], rtol=1e-9
    )
    assert list(figures) == [
        "lag_response_dl0-5",
        "lag_response_dl0-21:spline4",  # block names; the writer makes them safe file names
        "temperature_exposure_response",
        "temperature_exposure_lag_surface",
    ]
    curve = figures["lag_response_dl0-5"].figure.axes[0].get_lines()[0]
    np.testing.assert_allclose(curve.get_ydata(), dl5.lag_effects(10)["rr"], rtol=1e-9)
    # the temperature paragraph reports the minimum and the pollutant effect of this very model
    term = ExposureLagTerm("temperature", SplineResponse(df=4), SplineLag(0, 21, 4))
    with_term = fit(sample, "deaths_all", "pm25", lag="dl0-5", temperature=None, confounders=[term])
    mmt, effect = minimum_risk_exposure(with_term, term=term), with_term.effect(per=10)
    text = " ".join(b.text for b in section.blocks if isinstance(b, Text))
    assert f"lowest at temperature {mmt.exposure:.1f} (the {mmt.percentile:.0f}th percentile" in text
    assert f"from {mmt.low:.1f} to {mmt.high:.1f}" in text
    places = rr_decimals(effect.rr_low, effect.rr_high)  # the report's rule for RR decimals (report/numbers.py)
    assert f"RR per 10 {effect.rr:.{places}f} ({effect.rr_low:.{places}f} to {effect.rr_high:.{places}f})" in text
    assert "lowest at temperature 18." in text  # the simulator's truth is 19 °C (see the test above)
    assert f"against {mmt.exposure:.1f}" in figures["temperature_exposure_lag_surface"].title
