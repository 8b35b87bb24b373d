"""Figures of lag terms: the lag–response curve, the cumulative exposure–response curve over the exposure
distribution, and the exposure–lag–response surface.

Every function takes ``ax=None``, draws on it (or on a new figure not registered with pyplot) and returns
the Axes, so callers can style them further. Intervals are the Wald intervals of
:mod:`airhealth.model.lag_predictions`.

References
----------
Gasparrini A, Armstrong B, Kenward MG (2010). Distributed lag non-linear models. Statistics in Medicine
29:2224–2234 (the three views of an exposure–lag–response association).
"""

from __future__ import annotations

from typing import Any, Literal

import numpy as np

from .._choices import check_choice
from ..model.lag_predictions import exposure_response, find_lag_term, lag_response, minimum_risk_exposure
from ..prep.plausibility import recognise_pollutant, temperature_like
from .plots import new_axes, plain
from .style import (
    CONTRAST,
    DATA,
    ESTIMATE,
    RR_COLOURS,
    draw_band,
    draw_no_effect_line,
    integer_lags,
    new_figure,
    rr_norm,
    styled,
)

__all__ = ["exposure_label", "plot_exposure_lag_surface", "plot_exposure_response", "plot_lag_response"]

SurfaceKind = Literal["contour", "surface"]


def _reference_line(ax: Any) -> None:
    draw_no_effect_line(ax)


def _unit_of(result: Any, exposure: str) -> str | None:
    """The unit of ``exposure``: °C for the fit's temperature column or a column named as a temperature (the
    unit the guards of :mod:`airhealth.prep.plausibility` expect), else the fit's exposure unit for its
    exposure, else unknown (no unit shown rather than a wrong one)."""
    spec = result.spec
    if exposure == getattr(spec, "temperature", None) or (
        temperature_like(exposure) and recognise_pollutant(exposure) is None
    ):
        return "°C"
    return spec.unit if exposure == spec.exposure else None


def exposure_label(result: Any, exposure: str) -> str:
    """An exposure axis label with its unit, e.g. ``pm25 (µg/m³)``."""
    unit = _unit_of(result, exposure)
    return plain(f"{exposure} ({unit})" if unit else exposure)


@styled
def plot_lag_response(
    result: Any,
    value: float | None = None,
    reference: float | None = None,
    per: float = 10.0,
    term: Any = None,
    level: float = 0.95,
    ax: Any = None,
) -> Any:
    """Relative risk by lag with its interval band.

    For a linear exposure term (``value=None``) the RR per ``per`` units at each lag; for a non-linear term
    (or with ``value``) the RR of exposure ``value`` against ``reference`` at each lag.
    """
    ax = new_axes(ax, (6.5, 3.5))
    table = lag_response(result, value=value, reference=reference, per=per, term=term, level=level)
    lags = table["lag"].to_numpy()
    draw_band(ax, lags, table["rr_low"], table["rr_high"], label=f"{level:.0%} CI")
    ax.plot(lags, table["rr"], "-o" if len(lags) <= 8 else "-", color=ESTIMATE, ms=4, label="RR")
    _reference_line(ax)
    lt = find_lag_term(result, term)
    unit = _unit_of(result, lt.exposure) or "units"
    if value is None:
        ax.set_ylabel(plain(f"RR per {per:g} {unit}"))
    else:
        ref = table.attrs.get("reference", reference)
        versus = f" vs {ref:g}" if ref is not None else ""
        ax.set_ylabel(plain(f"RR at {value:g}{versus} {unit}"))
    ax.set_xlabel("lag (days)")
    integer_lags(ax)
    ax.set_title(plain(f"{result.spec.outcome} ~ {lt.exposure}: lag-response ({lt.basis.lag.label})"))
    return ax


def _draw_distribution(ax: Any, lt: Any, exposure_values: Any) -> bool:
    """The exposure distribution as a shaded strip along the bottom of the panel: each bin of exposure is
    shaded by its share of days (darker = more days), with ticks at the 5th, 50th and 95th percentiles.

    Our own choice: it shows where the data are (and how thin the ends of the curve are) without a second
    y-axis. Returns whether anything was drawn.
    """
    if exposure_values is not None:
        v = np.asarray(exposure_values, dtype=float)
        counts, edges = np.histogram(v[np.isfinite(v)], bins=40)
    elif lt.summary is not None:
        counts, edges = np.asarray(lt.summary.counts, dtype=float), np.asarray(lt.summary.edges, dtype=float)
    else:
        return False
    if counts.sum() <= 0:
        return False
    strip = ax.inset_axes([0.0, 0.0, 1.0, 0.06], sharex=ax)
    strip.pcolormesh(edges, [0, 1], (counts / counts.max())[None, :], cmap="Greys", vmin=0, vmax=1.25)
    cumulative = np.concatenate([[0], np.cumsum(counts)]) / counts.sum()
    for q in (0.05, 0.5, 0.95):
        strip.axvline(float(np.interp(q, cumulative, edges)), color=CONTRAST, lw=1.0)
    strip.set_axis_off()
    return True


@styled
def plot_exposure_response(
    result: Any,
    reference: float | None = None,
    values: Any = None,
    term: Any = None,
    level: float = 0.95,
    show_distribution: bool = True,
    show_minimum: bool = True,
    exposure_values: Any = None,
    ax: Any = None,
) -> Any:
    """Cumulative (over all lags) relative risk against ``reference`` across the exposure range.

    The exposure distribution is drawn as a light histogram along the bottom (from the fitted term, or from
    ``exposure_values``); for non-linear terms the exposure of lowest cumulative risk is marked.
    """
    ax = new_axes(ax, (6.5, 4.0))
    lt = find_lag_term(result, term)
    curve = exposure_response(result, values=values, reference=reference, term=term, level=level)
    x = curve["exposure"].to_numpy()
    draw_band(ax, x, curve["rr_low"], curve["rr_high"], label=f"{level:.0%} CI")
    ax.plot(x, curve["rr"], "-", color=ESTIMATE, label="cumulative RR")
    _reference_line(ax)
    if show_minimum and not lt.basis.response.is_linear and lt.summary is not None:
        mmt = minimum_risk_exposure(result, term=term, level=level)
        ax.axvline(mmt.exposure, color=CONTRAST, lw=0.9, ls=":", label=f"lowest risk {mmt.exposure:.3g}")
    if show_distribution and _draw_distribution(ax, lt, exposure_values):
        ax.plot([], [], color=DATA, lw=4, label="days at each level (strip; ticks: 5th, 50th, 95th pct)")
    ax.set_xlabel(exposure_label(result, lt.exposure))
    ax.set_ylabel(f"RR, all lags ({lt.basis.lag.label})")
    ax.set_title(plain(f"{result.spec.outcome} ~ {lt.exposure}: cumulative exposure-response"))
    ax.legend(loc="upper center", frameon=False, fontsize="small")
    return ax


@styled
def plot_exposure_lag_surface(
    result: Any,
    reference: float | None = None,
    term: Any = None,
    kind: SurfaceKind = "contour",
    n_exposure: int = 60,
    ax: Any = None,
) -> Any:
    """Relative risk over exposure (rows) and lag (columns) against ``reference``.

    ``kind="contour"`` draws filled contours (diverging colours centred on RR = 1, with a colour bar);
    ``kind="surface"`` a 3-D surface (pass a 3-D Axes or let the function create one).
    """
    check_choice("kind", kind, SurfaceKind)
    lt = find_lag_term(result, term)
    table = exposure_response(
        result, values=_surface_grid(lt, n_exposure), reference=reference, per_lag=True, term=term
    )
    lags = np.asarray(lt.basis.lags)
    exposure = table["exposure"].to_numpy().reshape(-1, lags.size)[:, 0]
    rr = table["rr"].to_numpy().reshape(exposure.size, lags.size)
    if kind == "surface":
        ax = ax if ax is not None else new_figure((7, 5), projection="3d")
        grid_lag, grid_x = np.meshgrid(lags, exposure)
        ax.plot_surface(grid_lag, grid_x, rr, cmap=RR_COLOURS, norm=rr_norm(rr), linewidth=0, antialiased=True)
        ax.set_zlabel("RR")
    else:
        ax = new_axes(ax, (7, 4.5))
        filled = ax.contourf(lags, exposure, rr, levels=21, cmap=RR_COLOURS, norm=rr_norm(rr))
        ax.contour(lags, exposure, rr, levels=[1.0], colors="0.3", linewidths=0.8)
        ax.figure.colorbar(filled, ax=ax, label="RR (white: 1, no association; line: RR = 1)")
        ax.grid(False)
    ax.set_xlabel("lag (days)")
    integer_lags(ax)
    ax.set_ylabel(exposure_label(result, lt.exposure))
    ax.set_title(plain(f"{result.spec.outcome} ~ {lt.exposure}: exposure-lag-response"))
    return ax


def _surface_grid(lt: Any, n: int) -> np.ndarray:
    if lt.summary is None:
        from ..errors import SpecificationError

        raise SpecificationError(
            "the surface needs the observed exposure range; fit with an exposure-lag basis "
            "(airhealth.model.bases.exposure_lag.ExposureLagBasis), which records it."
        )
    return np.linspace(lt.summary.low, lt.summary.high, n)
