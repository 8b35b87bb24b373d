"""Figures of fitted models. Every function takes ``ax=None``, draws on it (or a new figure) and returns
the Axes; none touches pyplot's global state."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

from .document import Figure
from .suppression import counts_for_figure

__all__ = ["new_axes", "observed_fitted_figure", "plain", "plot_effects", "plot_lag_effects", "plot_observed_fitted"]

_PER = {"daily": "daily", "weekly": "weekly", "monthly": "monthly", "omitted": "monthly"}  # what the line shows


def new_axes(ax: Any = None, size: tuple[float, float] = (8, 3.5)) -> Any:
    """Return ``ax`` or the Axes of a new figure not registered with pyplot."""
    if ax is not None:
        return ax
    from matplotlib.figure import Figure as MplFigure

    return MplFigure(figsize=size, layout="constrained").add_subplot()


def plain(text: object) -> str:
    """``text`` for a figure, drawn exactly as written: matplotlib would read text between two ``$`` as
    mathematics (and fail to draw the whole figure on a column called ``a$\\x$``), so ``$`` is escaped.

    Every user text (column names, units, labels) that goes into a figure passes through here.
    """
    return str(text).replace("$", r"\$")


def plot_observed_fitted(result: Any, ax: Any = None, suppress_below: int | None = None) -> Any:
    """Observed daily counts (points) and fitted means (line) over time.

    With ``suppress_below`` the small-count rule of :mod:`airhealth.report.suppression` decides what is
    drawn: daily values, weekly or monthly totals of both series, or the fitted totals alone.
    """
    ax = new_axes(ax, (9, 3.5))
    shown = counts_for_figure(result.observed, suppress_below, alongside=result.fitted)
    outcome = plain(result.spec.outcome)
    if shown.resolution != "omitted":
        marker = {"ms": 2} if shown.resolution == "daily" else {"ms": 3}
        ax.plot(shown.observed.index, shown.observed.to_numpy(), ".", color="0.55", label="observed", **marker)
    if shown.alongside is not None:
        ax.plot(shown.alongside.index, shown.alongside.to_numpy(), "-", lw=0.8, color="C0", label="fitted")
    per = _PER[shown.resolution]
    ax.set_xlabel("date")
    ax.set_ylabel(f"{per} {outcome}")
    what = "observed and fitted" if shown.resolution != "omitted" else "fitted (observed counts withheld)"
    ax.set_title(f"{outcome}: {what}" + ("" if per == "daily" else f", {per} totals"))
    ax.legend(loc="upper right", frameon=False)
    return ax


def observed_fitted_figure(result: Any, suppress_below: int | None = None, name: str = "observed_fitted") -> Figure:
    """The report block of :func:`plot_observed_fitted`, its note saying which counts are shown and why."""
    shown = counts_for_figure(result.observed, suppress_below)
    spec = result.spec
    what = "Fitted" if shown.resolution == "omitted" else "Observed and fitted"
    title = f"{what} {_PER[shown.resolution]} {spec.outcome} ({spec.exposure}, lag {spec.lag.label})"
    ax = plot_observed_fitted(result, suppress_below=suppress_below)
    return Figure(title, ax.figure, name, note=shown.note or None)


def plot_effects(table: Any, labels: Sequence[str] | None = None, ax: Any = None, per_label: str = "10 units") -> Any:
    """Relative risks with intervals, one row per line of an effects table (a forest-style plot)."""
    n = len(table)
    ax = new_axes(ax, (6.5, 0.35 * n + 1.2))
    y = np.arange(n)[::-1]
    rr, lo, hi = (table[c].to_numpy(dtype=float) for c in ("rr", "rr_low", "rr_high"))
    # a 2 x n array, not a list of two arrays: matplotlib 3.8 turns the list of one-element arrays of a one-row
    # table into scalars, which numpy >= 1.25 deprecates
    ax.errorbar(rr, y, xerr=np.vstack([rr - lo, hi - rr]), fmt="o", color="C0", ms=4, capsize=2)
    ax.axvline(1.0, color="0.4", lw=0.8, ls="--")
    if labels is None:
        labels = [f"{r.outcome} · {r.exposure} · lag {r.lag}" for r in table.itertuples()]
    ax.set_yticks(y, [plain(label) for label in labels])
    ax.set_xlabel(plain(f"relative risk per {per_label} (95% CI)"))
    return ax


def plot_lag_effects(result: Any, per: float = 10.0, ax: Any = None) -> Any:
    """Relative risk at each lag with its interval (points for few lags, a band for many)."""
    ax = new_axes(ax, (6.5, 3.5))
    table = result.lag_effects(per=per)
    lags = table["lag"].to_numpy()
    if len(lags) > 8:
        ax.fill_between(lags, table["rr_low"], table["rr_high"], color="C0", alpha=0.25, lw=0)
        ax.plot(lags, table["rr"], "-", color="C0")
    else:
        rr = table["rr"].to_numpy()
        ax.errorbar(lags, rr, yerr=[rr - table["rr_low"], table["rr_high"] - rr], fmt="o", capsize=3)
    ax.axhline(1.0, color="0.4", lw=0.8, ls="--")
    ax.set_xlabel("lag (days)")
    ax.set_ylabel(f"RR per {per:g} units")
    ax.set_title(plain(f"{result.spec.outcome} ~ {result.spec.exposure}: lag structure {result.spec.lag.label}"))
    return ax
