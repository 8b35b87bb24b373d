"""User text in figures is drawn as written: a column name with dollar signs cannot break a figure."""

from __future__ import annotations

import io
from pathlib import Path

import matplotlib
import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.report.exposure_plots import (
    plot_count_series,
    plot_coverage,
    plot_exposure_series,
    plot_monitor_series,
    plot_seasonal_pattern,
)
from airhealth.report.lag_plots import plot_lag_response
from airhealth.report.plots import plain, plot_effects, plot_lag_effects, plot_observed_fitted

matplotlib.use("Agg")

# Between two "$" matplotlib reads mathematics; "\foo" is no known symbol, so drawing such text unescaped
# raises ValueError (matplotlib's mathtext; observed with matplotlib 3.11).
MATH_BREAKER = "deaths $\\foo$ all"


def _draws(ax: object) -> None:
    ax.figure.savefig(io.BytesIO(), format="png")


def test_the_breaker_does_break_an_unescaped_figure() -> None:
    """Guard for the tests below: without plain() the text fails to draw."""
    from matplotlib.figure import Figure

    ax = Figure().add_subplot()
    ax.set_title(MATH_BREAKER)
    with pytest.raises(ValueError, match="foo"):
        _draws(ax)


def test_plain_escapes_every_dollar() -> None:
    assert plain("a $x$ b $") == "a \\$x\\$ b \\$"
    assert plain(12) == "12"


@pytest.fixture(scope="module")
def data() -> pd.DataFrame:
    d = airhealth.load_sample()
    d = d[d["date"] < "2013-01-01"]
    return d.rename(columns={"deaths_all": MATH_BREAKER, "pm25": "pm $2.5$ \\mu"})


def test_model_figures_draw_with_dollar_names(data: pd.DataFrame) -> None:
    result = airhealth.fit(data, outcome=MATH_BREAKER, exposure="pm $2.5$ \\mu", lag="dl0-3")
    for ax in (plot_observed_fitted(result), plot_lag_effects(result), plot_lag_response(result)):
        _draws(ax)
    assert plot_observed_fitted(result).get_title().startswith(plain(MATH_BREAKER))
    table = pd.DataFrame({"outcome": [MATH_BREAKER], "exposure": ["$\\bar$"], "lag": ["0"], "rr": [1.01],
                          "rr_low": [1.0], "rr_high": [1.02]})  # fmt: skip
    _draws(plot_effects(table, per_label="10 $\\nope$"))


def test_exposure_figures_draw_with_dollar_names(data: pd.DataFrame) -> None:
    for ax in (
        plot_exposure_series(data, "pm $2.5$ \\mu"),
        plot_seasonal_pattern(data, "pm $2.5$ \\mu"),
        plot_count_series(data, MATH_BREAKER, suppress_below=10),
    ):
        _draws(ax)
    hours = pd.date_range("2020-01-01", periods=96, freq="h")
    hourly = pd.DataFrame({"monitor": np.repeat(["$\\a$", "$\\b$"], 48), "hour": hours, "value": 1.0})
    _draws(plot_coverage(hourly))
    daily = pd.DataFrame(
        {"monitor": ["$\\a$"] * 3 + ["$\\b$"] * 3, "date": list(pd.date_range("2020-01-01", periods=3)) * 2, "v": 1.0}
    )
    _draws(plot_monitor_series(daily, value="v"))


def test_a_whole_report_on_dollar_names_completes(data: pd.DataFrame, tmp_path: Path) -> None:
    path = airhealth.write_report(
        data, outcomes=[MATH_BREAKER], exposures=["pm $2.5$ \\mu"], lags=["0"], out=tmp_path / "r",
        temperature="temperature", small_count_threshold=10,
    )  # fmt: skip
    assert path.is_file() and len(list((tmp_path / "r" / "figures").glob("*.png"))) >= 3
