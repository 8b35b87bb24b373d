r"""Forest plots: one row per city (or per model), on a log relative-risk scale shared by every panel.

Rows are sorted by estimate; each row's marker area is proportional to its weight in the pool, and its
estimate, interval and weight are printed beside it; the pooled estimate is a diamond spanning its
confidence interval, the prediction interval for a new city a bar below it, and the heterogeneity line
(I², τ², Cochran's Q p-value) closes the panel. Several panels (outcomes, exposures) drawn by
:func:`forest_figure` share one x-scale, so their widths can be compared by eye.

Inputs: the result of :func:`airhealth.pool` (:func:`pooled_forest_table` turns it into rows), or any table
with ``rr``/``rr_low``/``rr_high`` (:func:`rr_rows` makes those from a coefficient and its SE).

References
----------
Higgins JPT, Thompson SG (2002). Quantifying heterogeneity in a meta-analysis. Stat Med 21:1539–1558 (I²).
Higgins JPT, Thompson SG, Spiegelhalter DJ (2009). A re-evaluation of random-effects meta-analysis.
J R Stat Soc A 172:137–159 (the prediction interval).
"""

from __future__ import annotations

import textwrap
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd
from matplotlib.patches import Polygon
from matplotlib.ticker import FuncFormatter, MaxNLocator, NullFormatter

from ..errors import DataError, SpecificationError
from ..model.effects import normal_quantile
from .labels import display_name
from .numbers import format_coef, format_decimal, format_p, format_rr, rr_decimals
from .plots import plain
from .style import (
    ESTIMATE,
    POOLED,
    PREDICTION,
    draw_no_effect_line,
    house_style,
    new_figure,
    nothing_to_plot,
    styled,
)

__all__ = ["forest_figure", "plot_forest", "pooled_forest_table", "pooled_summary", "rr_limits", "rr_rows"]

_NEEDED = ("rr", "rr_low", "rr_high")


def rr_rows(table: pd.DataFrame, estimate: str = "coef", se: str = "se", per: float = 10.0, level: float = 0.95):
    """``table`` with ``rr``, ``rr_low``, ``rr_high`` = exp(per · (estimate ∓ z·se)) added (a copy)."""
    for column in (estimate, se):
        if column not in table.columns:
            raise DataError(f"column {column!r} is not in the table; columns are {list(table.columns)}.")
    z = normal_quantile(level)
    b, s = (pd.to_numeric(table[c], errors="coerce").to_numpy(dtype=float) for c in (estimate, se))
    return table.assign(rr=np.exp(per * b), rr_low=np.exp(per * (b - z * s)), rr_high=np.exp(per * (b + z * s)))


def pooled_forest_table(pooled: Any) -> pd.DataFrame:
    """City rows of a :class:`~airhealth.cities.pooled_result.PooledEffect`: ``city``, ``rr``, ``rr_low``,
    ``rr_high`` (from each city's own estimate and SE), ``weight_percent`` (its weight in the pool), ``per``
    and, when the pooled result carries one, the exposure ``unit`` (for the axis label)."""
    cities = pooled.blup()
    rows = rr_rows(cities, estimate="estimate", se="se", per=pooled.per, level=pooled.level)
    rows = rows[["city", "rr", "rr_low", "rr_high", "weight_percent"]].assign(per=pooled.per)
    unit = getattr(pooled, "unit", None)
    return rows if unit is None else rows.assign(unit=unit)


def pooled_summary(pooled: Any) -> dict[str, Any]:
    """What the pooled rows of a forest panel show, from a ``PooledEffect``."""
    d = pooled.to_dict()
    return {
        "rr": d["rr"], "rr_low": d["rr_low"], "rr_high": d["rr_high"], "pi_low": d["rr_pi_low"],
        "pi_high": d["rr_pi_high"], "i2": d["i2"], "tau2": d["tau2"], "q_p": d["q_p"], "method": d["method"],
        "k": d["k"],
    }  # fmt: skip


def rr_limits(*tables: pd.DataFrame, pooled: Sequence[Mapping[str, Any]] = ()) -> tuple[float, float]:
    """One x-range (on the log scale, padded, always including RR = 1) for every panel of a figure."""
    values = [1.0]
    for table in tables:
        values += [float(v) for c in ("rr_low", "rr_high") for v in table[c] if np.isfinite(v) and v > 0]
    for p in pooled:
        values += [float(p[k]) for k in ("rr_low", "rr_high", "pi_low", "pi_high") if k in p and p[k] > 0]
    low, high = np.log(min(values)), np.log(max(values))
    pad = 0.06 * max(high - low, 1e-3)
    return float(np.exp(low - pad)), float(np.exp(high + pad))


def _decimals(low: Any, high: Any) -> int:
    """Decimals of a panel's printed RRs: the report's one rule (:func:`~airhealth.report.numbers.rr_decimals`)."""
    return rr_decimals(low, high)


def _rr_text(rr: float, low: float, high: float, decimals: int) -> str:
    """'1.012 (1.003 to 1.021)', through :func:`~airhealth.report.numbers.format_rr`."""
    return format_rr(rr, low, high, decimals)


def _default_xlabel(table: pd.DataFrame) -> str:
    """The x-axis label from the table's ``per`` and ``unit`` columns (:func:`pooled_forest_table` adds them)."""
    unit = table["unit"].dropna() if "unit" in table.columns else pd.Series(dtype=object)
    if unit.empty:
        raise SpecificationError(
            "plot_forest cannot tell the exposure unit: the table has no 'unit' column (the pooled result "
            "carries none). Pass xlabel, e.g. xlabel='relative risk per 10 µg/m³ (log scale)'."
        )
    per = float(table["per"].iloc[0]) if "per" in table.columns else 10.0
    return f"relative risk per {per:g} {unit.iloc[0]} (log scale)"


def _log_axis(ax: Any, limits: tuple[float, float]) -> None:
    ax.set_xscale("log")
    ax.set_xlim(*limits)
    ax.xaxis.set_major_locator(MaxNLocator(nbins=6))  # plain RR values, also over a narrow range
    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:.4g}"))
    ax.xaxis.set_minor_formatter(NullFormatter())
    ax.grid(True, axis="x")
    ax.grid(False, axis="y")


def _diamond(ax: Any, y: float, p: Mapping[str, Any]) -> None:
    ax.add_patch(
        Polygon(
            [(p["rr_low"], y), (p["rr"], y + 0.35), (p["rr_high"], y), (p["rr"], y - 0.35)],
            closed=True, facecolor=POOLED, edgecolor=POOLED, zorder=3,
        )
    )  # fmt: skip


def _row_name(value: object, labels: Mapping[str, str] | None) -> str:
    """A row's display name, drawn as written and wrapped at 40 characters (a very long label would squeeze
    the panel to nothing)."""
    return plain(textwrap.fill(display_name(value, labels), 40, break_long_words=True))


def _sorted_rows(table: pd.DataFrame, label: str, weight: str | None) -> pd.DataFrame:
    missing = [c for c in (*_NEEDED, label, *([weight] if weight else [])) if c not in table.columns]
    if missing:
        raise DataError(
            f"the forest plot needs columns {missing} that the table lacks; columns are {list(table.columns)} "
            "(make rr, rr_low, rr_high from a coefficient and its SE with airhealth.report.forest_plot.rr_rows)."
        )
    rows = table[np.isfinite(table["rr"].to_numpy(dtype=float))]
    return rows.sort_values("rr", kind="stable").reset_index(drop=True)  # smallest at the bottom


def _right_column(ax: Any, y: float, text: str, weight_text: str = "", bold: bool = False) -> None:
    """The printed estimate (and weight) beside a row, at fixed offsets (points) right of the panel, so
    that the layout engine makes room for them whatever the panel's width."""
    kw = {
        "xycoords": ax.get_yaxis_transform(), "textcoords": "offset points", "va": "center", "fontsize": 8,
        "annotation_clip": False, "fontweight": "bold" if bold else "normal",
    }  # fmt: skip
    ax.annotate(text, (1.0, y), xytext=(46, 0), ha="left", **kw)
    if weight_text:
        ax.annotate(weight_text, (1.0, y), xytext=(40, 0), ha="right", **kw)


@styled
def plot_forest(
    table: pd.DataFrame,
    label: str = "city",
    weight: str | None = "weight_percent",
    pooled: Mapping[str, Any] | None = None,
    labels: Mapping[str, str] | None = None,
    xlabel: str | None = None,
    limits: tuple[float, float] | None = None,
    level: float = 0.95,
    ax: Any = None,
    title: str | None = None,
) -> Any:
    """A forest plot of the rows of ``table`` (``rr``, ``rr_low``, ``rr_high`` and a ``label`` column).

    Parameters
    ----------
    table : DataFrame
        One row per city or model. Rows without a finite ``rr`` are left out; an empty table gives a panel
        saying "nothing to plot".
    label : str
        Column naming the rows; values are shown through ``labels`` (display names).
    weight : str or None
        Column of weights in percent (marker area and the printed weight column); ``None`` or a missing
        column: equal markers and no weight column.
    pooled : mapping, optional
        The pooled estimate (``rr``, ``rr_low``, ``rr_high``; optional ``pi_low``/``pi_high`` for the
        prediction interval and ``i2``, ``tau2``, ``q_p`` for the heterogeneity line), e.g.
        :func:`pooled_summary`.
    labels : mapping, optional
        Display names of row labels, e.g. ``{"deaths_all": "All-cause deaths"}``.
    xlabel : str, optional
        The x-axis label; by default "relative risk per 10 µg/m³ (log scale)" from the table's ``per`` and
        ``unit`` columns (an error names the fix when the table has no unit).
    limits : (float, float), optional
        The x-range; :func:`forest_figure` gives every panel the same one (:func:`rr_limits`).
    title : str, optional
        Panel title (shown through ``labels``).
    """
    ax = ax if ax is not None else new_figure((8.0, 0.3 * (len(table) + 4) + 1.2))
    if title is not None:
        ax.set_title(plain(display_name(title, labels)))
    weight = weight if weight is not None and weight in table.columns else None
    rows = _sorted_rows(table, label, weight)
    if rows.empty:
        return nothing_to_plot(ax, "nothing to plot: no row has a finite estimate")
    xlabel = _default_xlabel(table) if xlabel is None else xlabel
    n = len(rows)
    y = np.arange(n, dtype=float) + (3 if pooled else 0)
    rr, low, high = (rows[c].to_numpy(dtype=float) for c in _NEEDED)
    ax.hlines(y, low, high, color=ESTIMATE, lw=1.1, zorder=2)
    sizes = 12 + 110 * rows[weight].to_numpy(dtype=float) / 100 * min(n, 20) / 2 if weight else np.full(n, 22.0)
    ax.scatter(rr, y, s=np.clip(sizes, 8, 160), marker="s", color=ESTIMATE, zorder=3, lw=0)
    names = [_row_name(v, labels) for v in rows[label]]
    ticks, tick_names = list(y), names
    dec = _decimals([*low, *([pooled["rr_low"]] if pooled else [])], [*high, *([pooled["rr_high"]] if pooled else [])])
    for yi, r in zip(y, rows.itertuples(index=False), strict=True):
        w = f"{getattr(r, weight):.1f}%" if weight else ""
        _right_column(ax, yi, _rr_text(r.rr, r.rr_low, r.rr_high, dec), w)
    top = y[-1] + 1
    _right_column(ax, top, f"RR ({level:.0%} CI)", "weight" if weight else "", bold=True)
    if pooled:
        extra_ticks, extra_names = _pooled_rows(ax, pooled, dec, bool(weight))
        ticks, tick_names = [*extra_ticks, *ticks], [*extra_names, *tick_names]
    draw_no_effect_line(ax, "vertical")
    _log_axis(ax, limits or rr_limits(rows, pooled=[pooled] if pooled else []))
    ax.set_yticks(ticks, tick_names)
    ax.set_ylim(-1.0 if pooled else -0.7, top + 0.7)
    ax.set_xlabel(plain(xlabel))
    return ax


def _pooled_rows(ax: Any, pooled: Mapping[str, Any], dec: int, weighted: bool) -> tuple[list[float], list[str]]:
    """The pooled diamond, the prediction interval bar and the heterogeneity line, below the city rows."""
    _diamond(ax, 1.6, pooled)
    text = _rr_text(pooled["rr"], pooled["rr_low"], pooled["rr_high"], dec)
    _right_column(ax, 1.6, text, "100%" if weighted else "", bold=True)
    ticks, names = [1.6], ["pooled"]
    if "pi_low" in pooled:
        ax.hlines(0.7, pooled["pi_low"], pooled["pi_high"], color=PREDICTION, lw=3.0, zorder=2)
        _right_column(ax, 0.7, _rr_text(pooled["rr"], pooled["pi_low"], pooled["pi_high"], dec))
        ticks, names = [0.7, *ticks], ["prediction interval", *names]
    if "i2" in pooled:
        transform = ax.get_yaxis_transform()
        ax.text(0.0, -0.4, _heterogeneity_text(pooled), transform=transform, fontsize=8, va="center", ha="left")
    return ticks, names


def _heterogeneity_text(p: Mapping[str, Any]) -> str:
    """I² with one decimal, τ² (a variance of log-RR per unit, often about 1e-7) in fixed form with three
    significant digits (``τ² = 0.000000177``, never ``1.77e-07``), Cochran's Q p by :func:`format_p`."""
    return (
        f"Heterogeneity: I² = {format_decimal(p['i2'], 1)}%, τ² = {format_coef(p['tau2'], 3)}, "
        f"Cochran's Q p = {format_p(p['q_p'])}"
    )


def forest_figure(
    panels: Mapping[str, tuple[pd.DataFrame, Mapping[str, Any] | None]],
    label: str = "city",
    weight: str | None = "weight_percent",
    labels: Mapping[str, str] | None = None,
    xlabel: str | None = None,
    level: float = 0.95,
) -> Any:
    """Several forest panels (title → (rows, pooled or None)) in one figure, sharing one x-scale.

    ``xlabel`` defaults to the label :func:`plot_forest` takes from the first panel's ``per`` and ``unit``.

    Returns the matplotlib Figure; its Axes are ``figure.axes`` in the order of ``panels``.
    """
    if not panels:
        return nothing_to_plot(new_figure((6.5, 2.0)), "nothing to plot: no panels").figure
    limits = rr_limits(*(t for t, _ in panels.values()), pooled=[p for _, p in panels.values() if p])
    xlabel = _default_xlabel(next(iter(panels.values()))[0]) if xlabel is None else xlabel
    heights = [len(t) + (4 if p else 1) + 1.5 for t, p in panels.values()]
    with house_style():
        from matplotlib.figure import Figure as MplFigure

        figure = MplFigure(figsize=(8.0, 0.28 * sum(heights) + 0.6), layout="constrained")
        axes = figure.subplots(len(panels), 1, sharex=True, squeeze=False, height_ratios=heights)[:, 0]
        for ax, (title, (rows, pooled)) in zip(axes, panels.items(), strict=True):
            plot_forest(rows, label, weight, pooled, labels, xlabel, limits, level, ax=ax, title=title)
            ax.set_xlabel(plain(xlabel) if ax is axes[-1] else "")
    return figure
