"""The house style of airhealth's figures: the ONE module that sets colours, sizes, fonts and gridlines.

Every plot function in :mod:`airhealth.report` is wrapped in :func:`styled`, which draws it inside a
:func:`matplotlib.rc_context` holding :data:`HOUSE_RC` — the style is applied per figure, while it is drawn,
and pyplot's global state is never touched (the caller's own rcParams are restored afterwards). As with any
``rc_context``, the settings are process-wide while a figure is being drawn: draw figures from one thread at
a time.

Colours (our own assignment of roles to a palette readable with the common colour-vision deficiencies):

========================  ============  ====================================================================
role                      colour        used for
========================  ============  ====================================================================
``ESTIMATE``              blue          the estimate of interest: RR curves, city markers, fitted lines
``BAND``                  blue, 22 %    every interval of a curve (one way for all lag figures: a band)
``CONTRAST``              vermillion    a second series to contrast (fitted counts, binned means, minimum)
``POOLED``                black         pooled estimates: the diamond, the pooled curve
``PREDICTION``            orange        prediction intervals of a random-effects pool
``DATA``                  grey          raw daily data behind a summary
``REFERENCE``             dark grey     the no-effect line RR = 1 (dashed)
========================  ============  ====================================================================

Relative-risk colour maps (:data:`RR_COLOURS`) run blue (RR below 1) through near-white (RR = 1) to
vermillion (RR above 1) and are always centred on RR = 1 by :func:`rr_norm`.

References
----------
Okabe M, Ito K (2008). Color Universal Design (CUD): how to make figures and presentations that are friendly
to colorblind people. J*Fly Data Depository for Drosophila researchers (the palette; hex values from memory).
Wong B (2011). Points of view: Color blindness. Nature Methods 8:441 (the same eight colours recommended for
figures; from memory).
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Iterator, Mapping
from contextlib import contextmanager
from typing import Any, TypeVar

import matplotlib
import numpy as np
from matplotlib import cycler
from matplotlib.colors import LinearSegmentedColormap, TwoSlopeNorm
from matplotlib.figure import Figure as MplFigure
from matplotlib.ticker import MaxNLocator

__all__ = [
    "BAND_ALPHA",
    "CONTRAST",
    "DATA",
    "ESTIMATE",
    "HOUSE_RC",
    "OKABE_ITO",
    "POOLED",
    "PREDICTION",
    "REFERENCE",
    "RR_COLOURS",
    "draw_band",
    "draw_no_effect_line",
    "house_style",
    "integer_lags",
    "new_figure",
    "nothing_to_plot",
    "rr_norm",
    "styled",
]

#: The eight colours of Okabe & Ito (2008), by name (hex values from memory).
OKABE_ITO: Mapping[str, str] = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky blue": "#56B4E9",
    "bluish green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish purple": "#CC79A7",
}
ESTIMATE = OKABE_ITO["blue"]
CONTRAST = OKABE_ITO["vermillion"]
POOLED = OKABE_ITO["black"]
PREDICTION = OKABE_ITO["orange"]
DATA = "#8C8C8C"
REFERENCE = "#4D4D4D"
BAND_ALPHA = 0.22
#: Low RR → RR = 1 → high RR (used with :func:`rr_norm`, which puts RR = 1 at the middle colour).
RR_COLOURS = LinearSegmentedColormap.from_list(
    "airhealth_rr", [OKABE_ITO["blue"], "#9CC3DE", "#F7F7F2", "#EDB48F", OKABE_ITO["vermillion"]]
)

#: Series colours in order; yellow is left out (too pale on white), black is kept for pooled estimates.
_CYCLE = [OKABE_ITO[c] for c in ("blue", "vermillion", "bluish green", "orange", "reddish purple", "sky blue")]

#: The rcParams of the house style (our own choices: small sans-serif text for print at column width,
#: only the left and bottom spines, light dotted horizontal gridlines, 300 dpi when saved).
HOUSE_RC: Mapping[str, Any] = {
    "font.family": "sans-serif",
    "font.sans-serif": ["DejaVu Sans"],  # shipped with matplotlib: the same look on every machine
    "font.size": 9.0,
    "axes.titlesize": 9.5,
    "axes.titleweight": "bold",
    "axes.labelsize": 9.0,
    "axes.labelcolor": "#222222",
    "axes.edgecolor": "#555555",
    "axes.linewidth": 0.7,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "axes.grid.axis": "y",
    "axes.prop_cycle": cycler(color=_CYCLE),
    "grid.color": "#D9D9D9",
    "grid.linestyle": ":",
    "grid.linewidth": 0.7,
    "xtick.labelsize": 8.0,
    "ytick.labelsize": 8.0,
    "xtick.color": "#333333",
    "ytick.color": "#333333",
    "xtick.major.size": 3.0,
    "ytick.major.size": 3.0,
    "legend.fontsize": 8.0,
    "legend.frameon": False,
    "lines.linewidth": 1.4,
    "lines.markersize": 4.0,
    "patch.linewidth": 0.5,
    "figure.dpi": 100,
    "figure.facecolor": "white",
    "savefig.dpi": 300,
    "savefig.facecolor": "white",
    "svg.fonttype": "path",  # text drawn as paths: the SVG looks the same without the font installed
}

F = TypeVar("F", bound=Callable[..., Any])


@contextmanager
def house_style() -> Iterator[None]:
    """Draw inside the house style (a temporary :func:`matplotlib.rc_context`; nothing global is kept)."""
    with matplotlib.rc_context(dict(HOUSE_RC)):
        yield


def _settle_ticks(figure: Any) -> None:
    """Create the tick objects now, inside the style: matplotlib makes them lazily at draw time, when the
    rc context is gone, and later ticks copy the first one's properties."""
    for axes in figure.axes:
        for axis in (axes.xaxis, axes.yaxis, getattr(axes, "zaxis", None)):
            if axis is None:
                continue
            axis.get_major_ticks()
            axis.get_minor_ticks()


def styled(func: F) -> F:
    """Decorator: run a plot function (which returns an Axes) in the house style."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        with house_style():
            ax = func(*args, **kwargs)
            if ax is not None and hasattr(ax, "figure"):
                _settle_ticks(ax.figure)
        return ax

    return wrapper  # type: ignore[return-value]


def new_figure(size: tuple[float, float] = (6.5, 3.5), projection: str | None = None) -> Any:
    """The Axes of a new figure in the house style, with constrained layout (no label is cut off) and not
    registered with pyplot."""
    with house_style():
        figure = MplFigure(figsize=size, layout="constrained")
        return figure.add_subplot(projection=projection) if projection else figure.add_subplot()


def integer_lags(ax: Any, axis: str = "x") -> None:
    """Ticks of a lag axis on whole days only (never at 2.5 days)."""
    target = ax.xaxis if axis == "x" else ax.yaxis
    target.set_major_locator(MaxNLocator(integer=True, steps=[1, 2, 5, 10]))


def draw_band(ax: Any, x: Any, low: Any, high: Any, label: str | None = None, color: str = ESTIMATE) -> Any:
    """The one way intervals are drawn around a curve: a translucent band."""
    return ax.fill_between(x, low, high, color=color, alpha=BAND_ALPHA, lw=0, label=label)


def draw_no_effect_line(ax: Any, orientation: str = "horizontal") -> None:
    """The RR = 1 reference line."""
    line = ax.axhline if orientation == "horizontal" else ax.axvline
    line(1.0, color=REFERENCE, lw=0.8, ls="--", zorder=1)


def rr_norm(rr: Any) -> TwoSlopeNorm:
    """A colour normalisation centred on RR = 1, symmetric on the log scale (RR and 1/RR get mirrored
    colours)."""
    values = np.asarray(rr, dtype=float)
    values = values[np.isfinite(values) & (values > 0)]
    spread = max(float(np.max(np.abs(np.log(values)))) if values.size else 0.0, 1e-6)
    return TwoSlopeNorm(vcenter=1.0, vmin=float(np.exp(-spread)), vmax=float(np.exp(spread)))


def nothing_to_plot(ax: Any, message: str) -> Any:
    """Write ``message`` in the middle of an empty panel (the documented answer to empty data)."""
    ax.text(0.5, 0.5, message, ha="center", va="center", transform=ax.transAxes, color=REFERENCE, wrap=True)
    ax.set_xticks([])
    ax.set_yticks([])
    ax.grid(False)
    return ax
