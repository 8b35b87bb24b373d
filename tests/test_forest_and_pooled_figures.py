"""Forest plots, the pooled lag curve and the cities report section: what is drawn and printed.

References for the numbers checked: the inverse-variance (fixed-effect) pooled estimate
sum(w y)/sum(w), w = 1/se², with SE 1/sqrt(sum(w)) (DerSimonian & Laird 1986, eq. for the fixed-effect
case); Wald intervals exp(per·(b ± z·se)) with z from scipy; the linear combination C·b with variance
C V Cᵀ (standard multivariate normal algebra).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.collections import PathCollection
from matplotlib.patches import Polygon
from scipy import stats

import airhealth
from airhealth.errors import DataError
from airhealth.report.cities_section import cities_section
from airhealth.report.document import Figure, Table, Text
from airhealth.report.forest_plot import forest_figure, plot_forest, pooled_forest_table, pooled_summary
from airhealth.report.numbers import format_p
from airhealth.report.pooled_lag_plot import plot_pooled_lag_curve, pooled_lag_curve

Z95 = stats.norm.ppf(0.975)
XLABEL = "relative risk per 10 µg/m³ (log scale)"


@pytest.fixture(scope="module")
def estimates() -> pd.DataFrame:
    rng = np.random.default_rng(20261202)
    k = 9
    return pd.DataFrame(
        {"city": [f"city_{i}" for i in range(k)], "coef": rng.normal(6e-4, 3e-4, k), "se": rng.uniform(1e-4, 4e-4, k)}
    )


def _right_texts(ax) -> dict[float, list[str]]:
    """Printed texts beside the rows, by row position."""
    out: dict[float, list[str]] = {}
    for t in ax.texts:
        y = t.xy[1] if hasattr(t, "xy") else t.get_position()[1]  # annotations sit at (panel edge, row)
        out.setdefault(round(y, 6), []).append(t.get_text())
    return out


def test_fixed_effect_forest_matches_the_inverse_variance_formulas(estimates: pd.DataFrame) -> None:
    pooled = airhealth.pool(estimates, method="fixed", per=10)
    ax = plot_forest(
        pooled_forest_table(pooled), pooled=pooled_summary(pooled), xlabel=XLABEL, labels={"city_3": "Third city"}
    )
    w = 1 / estimates["se"].to_numpy() ** 2
    mean = float(np.sum(w * estimates["coef"]) / w.sum())
    se = float(1 / np.sqrt(w.sum()))
    (diamond,) = [p for p in ax.patches if isinstance(p, Polygon)]
    xs = sorted(diamond.get_xy()[:4, 0])
    np.testing.assert_allclose(
        [xs[0], xs[1], xs[3]], np.exp(10 * np.array([mean - Z95 * se, mean, mean + Z95 * se])), rtol=1e-9
    )
    # rows sorted by estimate (smallest at the bottom), display names used, each row's RR printed beside it
    names = [t.get_text() for t in ax.get_yticklabels()]
    order = estimates.sort_values("coef")["city"].map(lambda c: "Third city" if c == "city_3" else c).tolist()
    assert names == ["prediction interval", "pooled", *order]
    (scatter,) = [c for c in ax.collections if isinstance(c, PathCollection)]
    rr_drawn = scatter.get_offsets()[:, 0]
    np.testing.assert_allclose(rr_drawn, np.exp(10 * np.sort(estimates["coef"].to_numpy())), rtol=1e-12)
    texts = _right_texts(ax)
    row = estimates.sort_values("coef").iloc[0]
    low, high = np.exp(10 * (row.coef - Z95 * row.se)), np.exp(10 * (row.coef + Z95 * row.se))
    printed = next(t for t in texts[3.0] if "to" in t)
    shown = [float(v) for v in printed.replace("(", " ").replace(")", " ").replace("to", " ").split()]
    np.testing.assert_allclose(shown, [np.exp(10 * row.coef), low, high], atol=5e-4)  # printed to >= 3 decimals
    weight = next(t for t in texts[3.0] if t.endswith("%"))
    assert weight == f"{100 * (1 / row.se**2) / w.sum():.1f}%"
    # marker area grows with the weight
    sizes = scatter.get_sizes()
    weights = (1 / estimates.sort_values("coef")["se"] ** 2).to_numpy()
    assert np.all(np.diff(sizes[np.argsort(weights)]) >= -1e-9)


def test_the_heterogeneity_line_and_prediction_interval_come_from_the_pool(estimates: pd.DataFrame) -> None:
    pooled = airhealth.pool(estimates, method="dl", per=10)
    d = pooled.to_dict()
    ax = plot_forest(pooled_forest_table(pooled), pooled=pooled_summary(pooled), xlabel=XLABEL)
    line = [t.get_text() for t in ax.texts if t.get_text().startswith("Heterogeneity")]
    q_p = "<0.001" if d["q_p"] < 0.001 else format_p(d["q_p"])  # format_p is checked in test_number_formatting
    # τ² in fixed form, 3 significant digits (numpy's positional formatter, trailing zeros trimmed): no "e-07"
    tau2 = np.format_float_positional(d["tau2"], precision=3, unique=False, fractional=False, trim="-")
    assert line == [f"Heterogeneity: I² = {d['i2']:.1f}%, τ² = {tau2}, Cochran's Q p = {q_p}"]
    assert "e-" not in line[0]
    bar = next(c for c in ax.collections if c.get_linewidth()[0] == 3.0)
    np.testing.assert_allclose(sorted(bar.get_segments()[0][:, 0]), [d["rr_pi_low"], d["rr_pi_high"]], rtol=1e-12)
    assert d["rr_pi_low"] <= d["rr_low"] and d["rr_pi_high"] >= d["rr_high"]


def test_panels_share_one_log_scale_and_nothing_is_cut_off(estimates: pd.DataFrame) -> None:
    wide = estimates.assign(coef=estimates["coef"] * 4, se=estimates["se"] * 3)
    first, second = airhealth.pool(estimates, per=10), airhealth.pool(wide, per=10)
    figure = forest_figure(
        {
            "deaths_all": (pooled_forest_table(first), pooled_summary(first)),
            "admissions": (pooled_forest_table(second), None),
        },
        labels={"deaths_all": "All-cause deaths"},
        xlabel="relative risk per 10 µg/m³ (log scale)",
    )
    a, b = figure.axes
    assert a.get_xlim() == b.get_xlim() and a.get_xscale() == b.get_xscale() == "log"
    widest = pooled_forest_table(second)
    assert a.get_xlim()[0] <= widest["rr_low"].min() and a.get_xlim()[1] >= widest["rr_high"].max()
    assert a.get_title() == "All-cause deaths" and b.get_title() == "admissions"
    assert b.get_xlabel() == "relative risk per 10 µg/m³ (log scale)" and a.get_xlabel() == ""
    canvas = FigureCanvasAgg(figure)
    canvas.draw()
    renderer = canvas.get_renderer()
    for ax in figure.axes:  # the printed estimates and weights, right of the panels, stay inside the figure
        box = ax.get_tightbbox(renderer)
        assert box.x1 <= figure.bbox.x1 + 1 and box.x0 >= -1


def test_a_table_without_estimates_is_refused_and_an_empty_one_says_so(estimates: pd.DataFrame) -> None:
    with pytest.raises(DataError, match=r"columns \['rr', 'rr_low', 'rr_high'\].*rr_rows"):
        plot_forest(estimates)
    empty = pooled_forest_table(airhealth.pool(estimates, per=10)).iloc[:0]
    ax = plot_forest(empty)
    assert [t.get_text() for t in ax.texts] == ["nothing to plot: no row has a finite estimate"]


@pytest.fixture(scope="module")
def lag_pool():
    rng = np.random.default_rng(7)
    k, p = 10, 3
    truth = np.array([4e-4, 2e-4, 0.5e-4])
    coefs = truth + rng.normal(0, 1e-4, (k, p))
    covs = [np.diag(rng.uniform(0.5e-8, 2e-8, p)) for _ in range(k)]
    return airhealth.pool_multivariate(pd.DataFrame(coefs, index=[f"c{i}" for i in range(k)]), covs)


def test_the_pooled_lag_curve_is_the_basis_times_the_pooled_vector(lag_pool) -> None:
    lags = np.arange(8)
    basis = np.column_stack([np.ones(8), lags / 7, (lags / 7) ** 2])  # a quadratic lag basis, 3 columns
    curve = pooled_lag_curve(lag_pool, basis, lags, per=10)
    coef = basis @ lag_pool.coef
    se = np.sqrt(np.diag(basis @ lag_pool.cov @ basis.T))
    np.testing.assert_allclose(curve["rr"], np.exp(10 * coef), rtol=1e-12)
    np.testing.assert_allclose(curve["rr_low"], np.exp(10 * (coef - Z95 * se)), rtol=1e-9)
    ax = plot_pooled_lag_curve(lag_pool, basis, lags, unit="µg/m³")
    city_lines = [line for line in ax.get_lines() if line.get_alpha() == 0.45]
    assert len(city_lines) == lag_pool.k
    blups = lag_pool.blup().coef.to_numpy() @ basis.T
    np.testing.assert_allclose(city_lines[0].get_ydata(), np.exp(10 * blups[0]), rtol=1e-12)
    pooled_line = next(line for line in ax.get_lines() if line.get_label() == "pooled")
    np.testing.assert_allclose(pooled_line.get_ydata(), curve["rr"], rtol=1e-12)
    assert ax.get_ylabel() == "RR per 10 µg/m³" and ax.get_xlabel() == "lag (days)"


def test_a_basis_of_the_wrong_shape_is_refused(lag_pool) -> None:
    with pytest.raises(DataError, match=r"the lag basis has shape \(5, 2\), but the pool has 3 coefficients"):
        pooled_lag_curve(lag_pool, np.ones((5, 2)))


def test_the_cities_section_holds_the_pooled_table_forest_plot_and_lag_curve(estimates, lag_pool) -> None:
    pooled = airhealth.pool(estimates, per=10)
    section = cities_section({"deaths_all": pooled}, unit="µg/m³", labels={"deaths_all": "All-cause deaths"},
                             lag_pool=lag_pool)  # fmt: skip
    kinds = [type(b) for b in section.blocks]
    assert kinds == [Text, Table, Table, Figure, Table, Figure]
    summary = section.blocks[1].frame
    assert summary.loc[0, "name"] == "All-cause deaths" and summary.loc[0, "per"] == "10 µg/m³"
    assert summary.loc[0, "rr"] == pytest.approx(pooled.to_dict()["rr"], rel=1e-12)
    assert "not proof of causation" in section.blocks[0].text
    forest = section.blocks[3].figure.axes[0]
    assert forest.get_title() == "All-cause deaths"
    assert "per 10 µg/m³" in section.blocks[3].title


def test_the_cities_section_is_written_into_the_report(estimates, tmp_path) -> None:
    from airhealth.report.html import write_html_report

    section = cities_section(airhealth.pool(estimates, per=10), unit="ppb")
    page = write_html_report([section], tmp_path / "r").read_text(encoding="utf-8")
    assert "Many cities: pooled estimates" in page and "data:image/svg+xml;base64," in page
    assert (tmp_path / "r" / "figures" / "forest_cities.svg").is_file()


def test_awkward_labels_are_drawn_as_written(estimates: pd.DataFrame) -> None:
    """HTML and LaTeX special characters, dollars, non-ASCII and a very long name: drawn, not interpreted."""
    import io

    awkward = {
        "city_0": "São Paulo <&> 100% a_b $x$",
        "city_1": "Ħ" + "very long city name " * 8,
    }
    pooled = airhealth.pool(estimates, per=10)
    ax = plot_forest(pooled_forest_table(pooled), pooled=pooled_summary(pooled), xlabel=XLABEL, labels=awkward)
    ax.figure.savefig(io.BytesIO(), format="png")  # a "$x$" read as mathematics would fail or change here
    names = [t.get_text() for t in ax.get_yticklabels()]
    assert "São Paulo <&> 100% a_b \\$x\\$" in names
    long = next(n for n in names if n.startswith("Ħ"))
    assert (
        max(len(line) for line in long.splitlines()) <= 40
        and long.replace("\n", " ").split() == awkward["city_1"].split()
    )
