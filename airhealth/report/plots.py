"""Figures of fitted models. Every function takes ``ax=None``, draws on it (or a new figure) and returns
the Axes; none touches pyplot's global state."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np

__all__ = ["new_axes", "plot_effects", "plot_lag_effects", "plot_observed_fitted"]


def new_axes(ax: Any = None, size: tuple[float, float] = (8, 3.5)) -> Any:
    """Return ``ax`` or the Axes of a new figure not registered with pyplot."""
    if ax is not None:
        return ax
    from matplotlib.figure import Figure

    return Figure(figsize=size, layout="constrained").add_subplot()


def plot_observed_fitted(result: Any, ax: Any = None) -> Any:
    """Observed daily counts (points) and fitted means (line) over time."""
    ax = new_axes(ax, (9, 3.5))
    ax.plot(result.observed.index, result.observed.to_numpy(), ".", ms=2, color="0.55", label="observed")
    ax.plot(result.fitted.index, result.fitted.to_numpy(), "-", lw=0.8, color="C0", label="fitted")
    ax.set_xlabel("date")
    ax.set_ylabel(f"daily {result.spec.outcome}")
    ax.set_title(f"{result.spec.outcome}: observed and fitted")
    ax.legend(loc="upper right", frameon=False)
    return ax


def plot_effects(table: Any, labels: Sequence[str] | None = None, ax: Any = None, per_label: str = "10 units") -> Any:
    """Relative risks with intervals, one row per line of an effects table (a forest-style plot)."""
    n = len(table)
    ax = new_axes(ax, (6.5, 0.35 * n + 1.2))
    y = np.arange(n)[::-1]
    rr, lo, hi = (table[c].to_numpy(dtype=float) for c in ("rr", "rr_low", "rr_high"))
    ax.errorbar(rr, y, xerr=[rr - lo, hi - rr], fmt="o", color="C0", ms=4, capsize=2)
    ax.axvline(1.0, color="0.4", lw=0.8, ls="--")
    if labels is None:
        labels = [f"{r.outcome} · {r.exposure} · lag {r.lag}" for r in table.itertuples()]
    ax.set_yticks(y, labels)
    ax.set_xlabel(f"relative risk per {per_label} (95% CI)")
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
    ax.set_title(f"{result.spec.outcome} ~ {result.spec.exposure}: lag structure {result.spec.lag.label}")
    return ax
