"""Figures of fitted models. Every function takes ``ax=None``, draws on it (or a new figure) and returns
the Axes; none touches pyplot's global state. Every figure is drawn in the house style of
:mod:`airhealth.report.style`; intervals around lag curves are always bands."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from .document import Figure
from .labels import Labels, display_name
from .style import DATA, ESTIMATE, draw_band, draw_no_effect_line, integer_lags, new_figure, styled
from .suppression import counts_for_figure

__all__ = ["new_axes", "observed_fitted_figure", "plain", "plot_effects", "plot_lag_effects", "plot_observed_fitted"]

_PER = {"daily": "daily", "weekly": "weekly", "monthly": "monthly", "omitted": "monthly"}  # what the line shows


def new_axes(ax: Any = None, size: tuple[float, float] = (8, 3.5)) -> Any:
    """Return ``ax`` or the Axes of a new figure not registered with pyplot."""
    return ax if ax is not None else new_figure(size)


def plain(text: object) -> str:
    """``text`` for a figure, drawn exactly as written: matplotlib would read text between two ``$`` as
    mathematics (and fail to draw the whole figure on a column called ``a$\\x$``), so ``$`` is escaped.

    Every user text (column names, units, labels) that goes into a figure passes through here.
    """
    return str(text).replace("$", r"\$")


@styled
def plot_observed_fitted(
    result: Any, ax: Any = None, suppress_below: int | None = None, labels: Labels | None = None
) -> Any:
    """Observed daily counts (points) and fitted means (line) over time (the outcome shown by its label).

    With ``suppress_below`` the small-count rule of :mod:`airhealth.report.suppression` decides what is
    drawn: daily values, weekly or monthly totals of both series, or the fitted totals alone.
    """
    ax = new_axes(ax, (9, 3.5))
    shown = counts_for_figure(result.observed, suppress_below, alongside=result.fitted)
    outcome = plain(display_name(result.spec.outcome, labels))
    if shown.resolution != "omitted":
        marker = {"ms": 2} if shown.resolution == "daily" else {"ms": 3}
        ax.plot(shown.observed.index, shown.observed.to_numpy(), ".", color=DATA, label="observed", **marker)
    if shown.alongside is not None:
        ax.plot(shown.alongside.index, shown.alongside.to_numpy(), "-", lw=0.9, color=ESTIMATE, label="fitted")
    per = _PER[shown.resolution]
    ax.set_xlabel("date")
    ax.set_ylabel(f"{per} {outcome} (count)")
    what = "observed and fitted" if shown.resolution != "omitted" else "fitted (observed counts withheld)"
    ax.set_title(f"{outcome}: {what}" + ("" if per == "daily" else f", {per} totals"))
    ax.legend(loc="upper right", frameon=False)
    return ax


def observed_fitted_figure(
    result: Any, suppress_below: int | None = None, name: str = "observed_fitted", labels: Labels | None = None
) -> Figure:
    """The report block of :func:`plot_observed_fitted`, its note saying which counts are shown and why;
    outcome and exposure are named by their ``labels`` (display names)."""
    shown = counts_for_figure(result.observed, suppress_below)
    spec = result.spec
    what = "Fitted" if shown.resolution == "omitted" else "Observed and fitted"
    outcome, exposure = (display_name(v, labels) for v in (spec.outcome, spec.exposure))
    title = f"{what} {_PER[shown.resolution]} {outcome} ({exposure}, lag {spec.lag.label})"
    ax = plot_observed_fitted(result, suppress_below=suppress_below, labels=labels)
    return Figure(title, ax.figure, name, note=shown.note or None)


def plot_effects(table: Any, labels: Sequence[str] | None = None, ax: Any = None, per_label: str = "10 units") -> Any:
    """Relative risks with intervals, one row per line of an effects table: a forest plot
    (:func:`airhealth.report.forest_plot.plot_forest`, log scale, estimates printed beside the rows)."""
    from .forest_plot import plot_forest

    if labels is None:
        labels = [f"{r.outcome} · {r.exposure} · lag {r.lag}" for r in table.itertuples()]
    rows = table.assign(row_label=list(labels))
    return plot_forest(rows, label="row_label", weight=None, xlabel=f"relative risk per {per_label} (95% CI)", ax=ax)


@styled
def plot_lag_effects(result: Any, per: float = 10.0, ax: Any = None) -> Any:
    """Relative risk at each lag (points joined by a line) with its interval as a band."""
    ax = new_axes(ax, (6.5, 3.5))
    table = result.lag_effects(per=per)
    lags = table["lag"].to_numpy()
    draw_band(ax, lags, table["rr_low"], table["rr_high"], label="95% CI")
    ax.plot(lags, table["rr"], "-o" if len(lags) <= 8 else "-", color=ESTIMATE, ms=4, label="RR")
    draw_no_effect_line(ax)
    integer_lags(ax)
    ax.set_xlabel("lag (days)")
    ax.set_ylabel(plain(f"RR per {per:g} {result.spec.unit}"))
    ax.set_title(plain(f"{result.spec.outcome} ~ {result.spec.exposure}: lag structure {result.spec.lag.label}"))
    return ax
