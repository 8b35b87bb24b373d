"""Figures in the house style: drawn data and labels checked, not only that a file exists.

Units on every axis, integer lag ticks, one way of drawing intervals (bands), colour bars centred on RR = 1,
no label cut off, the exposure distribution drawn, monitor codes explained, empty data saying so, and the
caller's matplotlib settings left alone.
"""

from __future__ import annotations

import matplotlib
import numpy as np
import pandas as pd
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import to_hex
from matplotlib.container import ErrorbarContainer

import airhealth
from airhealth.model.bases.exposure_lag import ExposureLagBasis, SplineResponse
from airhealth.report import style
from airhealth.report.diagnostic_plots import plot_residual_autocorrelation
from airhealth.report.exposure_plots import (
    plot_coverage,
    plot_exposure_series,
    plot_monitor_series,
    plot_seasonal_pattern,
)
from airhealth.report.lag_plots import plot_exposure_lag_surface, plot_exposure_response, plot_lag_response
from airhealth.report.plots import plot_lag_effects, plot_observed_fitted

matplotlib.use("Agg")


@pytest.fixture(scope="module")
def three_years(_sample_once: pd.DataFrame) -> pd.DataFrame:
    return _sample_once[_sample_once["date"] < "2013-01-01"].reset_index(drop=True)


@pytest.fixture(scope="module")
def ppb_fit(three_years: pd.DataFrame):
    return airhealth.fit(three_years, "deaths_all", "o3", lag="dl0-5", temperature="temperature", unit="ppb")


@pytest.fixture(scope="module")
def short_fit(three_years: pd.DataFrame):
    return airhealth.fit(three_years, "deaths_all", "pm25", lag="dl0-2", temperature="temperature")


@pytest.fixture(scope="module")
def surface_fit(three_years: pd.DataFrame):
    return airhealth.fit(three_years, "deaths_all", "temperature", lag=ExposureLagBasis(SplineResponse(df=3), "dl0-7"))


def _draw(figure) -> object:
    canvas = FigureCanvasAgg(figure)
    canvas.draw()
    return canvas.get_renderer()


def _cut_texts(figure) -> list[str]:
    """Panels whose drawn extent (tick labels, axis labels, titles, texts) leaves the figure: what a saved PNG
    would cut off. Named by their labels."""
    renderer = _draw(figure)
    box = figure.bbox
    cut = []
    for ax in figure.axes:
        labels = [t for t in (ax.xaxis.label, ax.yaxis.label, ax.title) if t.get_text()]
        extents = [ax.get_tightbbox(renderer), *(t.get_window_extent(renderer) for t in labels)]
        for e in extents:  # (the axis labels separately: matplotlib 3.8 leaves a colour bar's out of the first)
            if e.x0 < box.x0 - 1 or e.y0 < box.y0 - 1 or e.x1 > box.x1 + 1 or e.y1 > box.y1 + 1:
                cut.append(ax.get_xlabel() or ax.get_ylabel() or ax.get_title() or "a panel")
                break
    return cut


def _all_integers(values) -> bool:
    values = np.asarray(values, dtype=float)
    return bool(np.all(np.abs(values - np.round(values)) < 1e-9))


def test_lag_figures_have_integer_day_ticks_and_the_unit(ppb_fit, short_fit) -> None:
    for fit in (ppb_fit, short_fit):  # six lags and three: matplotlib alone put ticks at 0.5 and 2.5 days
        for ax in (plot_lag_effects(fit), plot_lag_response(fit)):
            _draw(ax.figure)
            low, high = ax.get_xlim()
            ticks = [t for t in ax.get_xticks() if low <= t <= high]
            assert len(ticks) >= 2 and _all_integers(ticks), ticks
            assert ax.get_xlabel() == "lag (days)"
            assert ax.get_ylabel() == f"RR per 10 {fit.spec.unit}"
    assert plot_lag_effects(ppb_fit).get_ylabel() == "RR per 10 ppb"


def test_every_lag_figure_draws_intervals_as_a_band(ppb_fit, short_fit) -> None:
    """One way for all lag figures: a band, never error bars (short lags used to get error bars)."""
    for fit in (ppb_fit, short_fit):
        table = fit.lag_effects(per=10)
        for ax in (plot_lag_effects(fit), plot_lag_response(fit)):
            assert not any(isinstance(c, ErrorbarContainer) for c in ax.containers)
            band = ax.collections[0]
            vertices = band.get_paths()[0].vertices
            assert vertices[:, 1].min() == pytest.approx(table["rr_low"].min(), rel=1e-12)
            assert vertices[:, 1].max() == pytest.approx(table["rr_high"].max(), rel=1e-12)
            assert to_hex(band.get_facecolor()[0], keep_alpha=False) == style.ESTIMATE.lower()
            np.testing.assert_allclose(ax.get_lines()[0].get_ydata(), table["rr"], rtol=1e-12)


def test_exposure_and_temperature_axes_carry_their_units(ppb_fit, surface_fit, three_years) -> None:
    assert plot_exposure_response(surface_fit).get_xlabel() == "temperature (°C)"
    assert plot_exposure_lag_surface(surface_fit, reference=19.0, n_exposure=15).get_ylabel() == "temperature (°C)"
    assert plot_exposure_response(ppb_fit, values=np.linspace(0, 80, 30)).get_xlabel() == "o3 (ppb)"
    checks = airhealth.diagnose(ppb_fit)
    assert checks.plot_residuals_against(three_years.set_index("date")["temperature"]).get_xlabel() == (
        "temperature (°C)"
    )
    assert plot_observed_fitted(ppb_fit).get_ylabel() == "daily deaths_all (count)"


def test_the_colour_bar_is_centred_on_no_association(surface_fit) -> None:
    ax = plot_exposure_lag_surface(surface_fit, reference=19.0, n_exposure=20)
    filled = ax.collections[0]
    norm = filled.norm
    assert norm.vcenter == 1.0
    assert np.log(norm.vmax) == pytest.approx(-np.log(norm.vmin), rel=1e-12)  # RR and 1/RR mirror each other
    white = style.RR_COLOURS(0.5)
    np.testing.assert_allclose(filled.cmap(norm(1.0)), white, atol=1e-12)
    colourbar = ax.figure.axes[1]
    assert "RR" in colourbar.get_ylabel() and "1" in colourbar.get_ylabel()
    assert _cut_texts(ax.figure) == []
    ticks = ax.get_xticks()
    assert _all_integers(ticks)


def test_the_cut_off_check_sees_a_cut_label() -> None:
    """Guard for the checks of cut labels: the old coverage layout (vertical colour bar, no layout engine)."""
    from matplotlib.figure import Figure

    figure = Figure(figsize=(8.0, 0.95))
    ax = figure.add_subplot()
    figure.colorbar(ax.imshow(np.ones((1, 12))), ax=ax, label="share of hours present")
    assert _cut_texts(figure) != []


@pytest.mark.parametrize("monitors", [1, 2, 8])
def test_the_coverage_colour_bar_label_is_never_cut_off(monitors: int) -> None:
    """The measured defect: with few monitors the label read 'share of hours prese'."""
    hours = pd.date_range("2021-01-01", periods=24 * 90, freq="h")
    frame = pd.DataFrame(
        {"monitor": np.repeat([f"M{i}" for i in range(monitors)], hours.size), "hour": np.tile(hours, monitors)}
    ).assign(value=1.0)
    ax = plot_coverage(frame)
    labels = [a.get_xlabel() for a in ax.figure.axes[1:]]
    assert labels == ["share of hours with a value"]
    assert _cut_texts(ax.figure) == []


def test_the_exposure_distribution_is_drawn_as_a_strip_of_days(short_fit, three_years) -> None:
    values = three_years["pm25"].to_numpy(dtype=float)
    ax = plot_exposure_response(short_fit, values=np.linspace(0, 60, 30), exposure_values=values)
    (strip,) = ax.child_axes
    counts, _ = np.histogram(values[np.isfinite(values)], bins=40)
    np.testing.assert_allclose(np.ravel(strip.collections[0].get_array()), counts / counts.max())
    medians = [line.get_xdata()[0] for line in strip.get_lines()]
    assert medians[1] == pytest.approx(np.nanmedian(values), rel=0.05)  # the 50th percentile tick (binned)
    assert any("days at each level" in t.get_text() for t in ax.get_legend().get_texts())


def test_monitor_codes_are_explained_in_the_legend() -> None:
    days = pd.date_range("2021-01-01", periods=10)
    daily = pd.DataFrame({"monitor": np.repeat(["NHP", "NHC"], 10), "date": np.tile(days, 2), "v": 1.0})
    ax = plot_monitor_series(daily, value="v", names={"NHP": "park"}, label="NO2 (ppb)")
    legend = ax.get_legend()
    assert [t.get_text() for t in legend.get_texts()] == ["NHC", "NHP – park"]
    assert legend.get_title().get_text() == "monitor (code)"
    assert ax.get_ylabel() == "NO2 (ppb)"


def test_empty_data_gives_a_panel_that_says_so(three_years) -> None:
    empty = three_years.assign(pm25=np.nan)
    for ax in (plot_exposure_series(empty, "pm25"), plot_seasonal_pattern(empty, "pm25")):
        assert [t.get_text() for t in ax.texts] == ["nothing to plot: pm25 has no value"]
        assert not ax.get_lines()


def test_figures_are_drawn_in_the_house_style_and_leave_the_caller_settings_alone(ppb_fit) -> None:
    before = {k: v for k, v in matplotlib.rcParams.items() if k in style.HOUSE_RC}
    ax = plot_lag_effects(ppb_fit)
    after = {k: v for k, v in matplotlib.rcParams.items() if k in style.HOUSE_RC}
    assert after == before, "the style is applied per figure, never globally"
    _draw(ax.figure)  # outside the style: ticks made lazily at draw time must still be in the house style
    sizes = {t.label1.get_fontsize() for t in ax.xaxis.get_major_ticks()}
    assert sizes == {style.HOUSE_RC["xtick.labelsize"]}
    assert not ax.spines["top"].get_visible() and not ax.spines["right"].get_visible()
    assert to_hex(ax.get_lines()[0].get_color()) == style.ESTIMATE.lower()


def test_the_palette_is_the_okabe_ito_set() -> None:
    # Okabe & Ito (2008) / Wong (2011) colours (hex values from memory, see airhealth/report/style.py)
    assert set(style.OKABE_ITO.values()) == {
        "#000000", "#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7",
    }  # fmt: skip
    cycle = [c["color"] for c in style.HOUSE_RC["axes.prop_cycle"]]
    assert set(cycle) <= set(style.OKABE_ITO.values()) and style.OKABE_ITO["yellow"] not in cycle


def test_autocorrelation_lags_are_whole_days(ppb_fit) -> None:
    ax = plot_residual_autocorrelation(airhealth.diagnose(ppb_fit))
    _draw(ax.figure)
    low, high = ax.get_xlim()
    assert _all_integers([t for t in ax.get_xticks() if low <= t <= high])
