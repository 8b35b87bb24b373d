"""Figures of attributable burden. Every function takes ``ax=None``, draws on it (or a new figure) and returns
the Axes; none touches pyplot's global state."""

from __future__ import annotations

from typing import Any

import pandas as pd

from .plots import new_axes, plain

__all__ = ["SIDE_WORDS", "burden_by_month_shown", "plot_burden_by_month"]

_BAR = "#5b8e7d"  # muted green bars
_RANGE = "#2f3e46"  # dark slate interval lines
#: How a burden's side reads in titles and sentences.
SIDE_WORDS = {"above": "above", "below": "below", "both": "on either side of"}


def burden_by_month_shown(result: Any, suppress_below: int | None = None) -> tuple[str, pd.DataFrame, str]:
    """What the monthly figure draws: ``("monthly", table, note)``.

    Attributable numbers are model estimates, not counts (the rule of
    :mod:`airhealth.report.burden_section`), so every month is drawn whatever ``suppress_below`` is; the
    argument is accepted so that callers pass the report's threshold in one way everywhere.
    """
    return "monthly", result.table("year_month"), ""


def plot_burden_by_month(result: Any, ax: Any = None, suppress_below: int | None = None) -> Any:
    """Attributable cases per calendar month (bars) with their Monte Carlo intervals (lines).

    Estimates are drawn whatever ``suppress_below`` is: they are not counts (:func:`burden_by_month_shown`).
    """
    ax = new_axes(ax, (9, 3.5))
    resolution, table, note = burden_by_month_shown(result, suppress_below)
    if len(table):
        fmt = "%Y-%m" if resolution == "monthly" else "%Y"
        when = pd.to_datetime(table["period"], format=fmt)
        width = 25 if resolution == "monthly" else 300
        an = table["attributable"].to_numpy(dtype=float)
        ax.bar(when, an, width=width, color=_BAR, align="edge", lw=0)
        middle = when + pd.Timedelta(days=width / 2)
        ax.vlines(middle, table["attributable_low"], table["attributable_high"], color=_RANGE, lw=0.7)
        ax.axhline(0.0, color="0.5", lw=0.6)
    else:
        ax.text(0.5, 0.5, plain(note), transform=ax.transAxes, ha="center", va="center", color="0.3")
    per = "month" if resolution != "yearly" else "year"
    c = result.counterfactual
    ax.set_ylabel(plain(f"attributable {result.outcome} per {per}"))
    ax.set_xlabel("date")
    side = SIDE_WORDS.get(result.side, result.side)
    ax.set_title(plain(f"{result.outcome} attributable to {result.exposure} {side} {c.value:.3g} {c.unit}"))
    ax.margins(x=0.01)
    ax.spines[["top", "right"]].set_visible(False)
    return ax
