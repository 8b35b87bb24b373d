"""Figures of model diagnostics: residual autocorrelation, residuals over time and against a covariate.

Every function takes ``ax=None``, draws on it (or a new figure) and returns the Axes; none touches pyplot's
global state. The diagnostics themselves are computed in :mod:`airhealth.studies.diagnostics`.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from ..errors import DataError
from .plots import new_axes, plain
from .style import CONTRAST, DATA, ESTIMATE, REFERENCE, integer_lags, styled

__all__ = ["plot_residual_autocorrelation", "plot_residuals_against", "plot_residuals_over_time"]


@styled
def plot_residual_autocorrelation(diagnostics: Any, ax: Any = None) -> Any:
    """Autocorrelation and partial autocorrelation of the deviance residuals by lag, with the ±1.96/√n band."""
    ax = new_axes(ax, (8, 3.5))
    table = diagnostics.autocorrelation
    lags = table["lag"].to_numpy()
    ax.vlines(lags - 0.15, 0, table["acf"].to_numpy(), color=ESTIMATE, lw=2, label="autocorrelation")
    ax.vlines(lags + 0.15, 0, table["pacf"].to_numpy(), color=CONTRAST, lw=2, label="partial autocorrelation")
    ax.axhline(0.0, color="0.3", lw=0.8)
    for sign in (-1, 1):
        ax.axhline(sign * diagnostics.band, color=REFERENCE, lw=0.8, ls="--")
    ax.set_xlabel("lag (days)")
    integer_lags(ax)
    ax.set_ylabel("correlation")
    ax.set_title(f"{plain(diagnostics.result.spec.outcome)}: residual autocorrelation (dashed: white-noise 95% band)")
    ax.legend(loc="upper right", frameon=False)
    return ax


@styled
def plot_residuals_over_time(result: Any, ax: Any = None) -> Any:
    """Deviance residuals of the days used against date."""
    ax = new_axes(ax, (9, 3.5))
    residuals = result.residuals("deviance")
    ax.plot(residuals.index, residuals.to_numpy(), ".", ms=2, color=DATA)
    ax.axhline(0.0, color=REFERENCE, lw=0.8)
    ax.set_xlabel("date")
    ax.set_ylabel("deviance residual")
    ax.set_title(f"{plain(result.spec.outcome)}: residuals over time")
    return ax


@styled
def plot_residuals_against(result: Any, values: pd.Series, label: str | None = None, ax: Any = None) -> Any:
    """Deviance residuals against a daily series (e.g. temperature) indexed by date, with a binned mean.

    The fit keeps no covariate values, so the series is given (e.g. ``data.set_index("date")["temperature"]``);
    it is matched to the days used by date.
    """
    if not isinstance(values, pd.Series) or not isinstance(values.index, pd.DatetimeIndex):
        raise DataError("give the covariate as a Series indexed by date, e.g. data.set_index('date')['temperature'].")
    residuals = result.residuals("deviance")
    x = values.reindex(residuals.index).to_numpy(dtype=float)
    keep = np.isfinite(x)
    if keep.sum() < 2:
        raise DataError(
            f"the series {values.name!r} has no value on the days the model used "
            f"({residuals.index[0]:%Y-%m-%d} to {residuals.index[-1]:%Y-%m-%d}); check its dates."
        )
    ax = new_axes(ax, (6, 4))
    ax.plot(x[keep], residuals.to_numpy()[keep], ".", ms=2, color=DATA)
    bins = pd.qcut(x[keep], q=min(20, int(keep.sum() // 10) or 1), duplicates="drop")
    means = pd.Series(residuals.to_numpy()[keep]).groupby(bins, observed=True).mean()
    ax.plot([b.mid for b in means.index], means.to_numpy(), "-o", ms=3, color=CONTRAST, label="mean by twentieth")
    ax.axhline(0.0, color=REFERENCE, lw=0.8)
    ax.set_xlabel(plain(label or _with_unit(result, values.name) or "covariate"))
    ax.set_ylabel("deviance residual")
    ax.set_title(f"{plain(result.spec.outcome)}: residuals against {plain(label or values.name or 'covariate')}")
    ax.legend(loc="upper right", frameon=False)
    return ax


def _with_unit(result: Any, name: Any) -> str | None:
    """The temperature column of the fit gets its unit (°C); other names are kept."""
    if name is None:
        return None
    return f"{name} (°C)" if name == getattr(result.spec, "temperature", None) else str(name)
