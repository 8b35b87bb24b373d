r"""The pooled lag–response curve of a multivariate pool, with each city's shrunken curve drawn faintly.

With a lag basis matrix :math:`C` (one row per lag day, one column per pooled coefficient; the identity for
unconstrained lags) the pooled curve is :math:`\mathrm{RR}(l) = \exp(\delta\, c_l^\top\hat\beta)` with the
Wald interval from :math:`\mathrm{Var}(c_l^\top\hat\beta) = c_l^\top \hat V c_l`, :math:`\delta` the
exposure increase (``per``). City curves use the best linear unbiased predictions of each city's vector
(:meth:`~airhealth.cities.multivariate_result.MultivariatePooled.blup`).

References
----------
Gasparrini A, Armstrong B, Kenward MG (2012). Multivariate meta-analysis for non-linear and other
multi-parameter associations. Statistics in Medicine 31:3821–3839 (from memory).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from ..errors import DataError
from ..model.effects import normal_quantile
from .plots import plain
from .style import DATA, POOLED, draw_band, draw_no_effect_line, integer_lags, new_figure, styled

__all__ = ["plot_pooled_lag_curve", "pooled_lag_curve"]


def _basis(pooled: Any, basis: Any, lags: Any) -> tuple[np.ndarray, np.ndarray]:
    p = len(pooled.coef)
    C = np.eye(p) if basis is None else np.asarray(basis, dtype=float)
    if C.ndim != 2 or C.shape[1] != p:
        raise DataError(
            f"the lag basis has shape {C.shape}, but the pool has {p} coefficients; give one row per lag day and "
            f"{p} columns (the basis the city coefficients were estimated with)."
        )
    days = np.arange(C.shape[0]) if lags is None else np.asarray(lags)
    if days.shape != (C.shape[0],):
        raise DataError(f"{days.size} lags given for a basis of {C.shape[0]} rows; give one lag per row.")
    return C, days


def pooled_lag_curve(
    pooled: Any, basis: Any = None, lags: Any = None, per: float = 10.0, level: float = 0.95
) -> pd.DataFrame:
    """The pooled relative risk at each lag: ``lag``, ``coef``, ``se``, ``rr``, ``rr_low``, ``rr_high``."""
    C, days = _basis(pooled, basis, lags)
    coef = C @ np.asarray(pooled.coef, dtype=float)
    se = np.sqrt(np.einsum("ij,jk,ik->i", C, np.asarray(pooled.cov, dtype=float), C))
    z = normal_quantile(level)
    return pd.DataFrame(
        {
            "lag": days, "coef": coef, "se": se, "rr": np.exp(per * coef),
            "rr_low": np.exp(per * (coef - z * se)), "rr_high": np.exp(per * (coef + z * se)),
        }
    )  # fmt: skip


@styled
def plot_pooled_lag_curve(
    pooled: Any,
    basis: Any = None,
    lags: Any = None,
    per: float = 10.0,
    unit: str = "units",
    level: float = 0.95,
    show_cities: bool = True,
    ax: Any = None,
) -> Any:
    """Pooled RR per ``per`` ``unit`` at each lag with its interval band; city BLUP curves faint behind it.

    Parameters
    ----------
    pooled : MultivariatePooled
        From :func:`airhealth.pool_multivariate` (``coef``, ``cov``; ``blup()`` for the city curves).
    basis : array (lags × coefficients), optional
        The lag basis the coefficients belong to; default the identity (one coefficient per lag day).
    lags : array, optional
        The lag day of each basis row (default 0, 1, 2, ...).
    """
    ax = ax if ax is not None else new_figure((6.5, 3.6))
    curve = pooled_lag_curve(pooled, basis, lags, per, level)
    C, days = _basis(pooled, basis, lags)
    if show_cities:
        cities = pooled.blup().coef.to_numpy(dtype=float) @ C.T
        for row in cities:
            ax.plot(days, np.exp(per * row), color=DATA, lw=0.6, alpha=0.45, zorder=1)
        ax.plot([], [], color=DATA, lw=0.6, label=f"cities ({len(cities)}, shrunken estimates)")
    draw_band(ax, days, curve["rr_low"], curve["rr_high"], label=f"pooled {level:.0%} CI")
    ax.plot(days, curve["rr"], "-o", color=POOLED, ms=3, lw=1.6, label="pooled", zorder=3)
    draw_no_effect_line(ax)
    integer_lags(ax)
    ax.set_xlabel("lag (days)")
    ax.set_ylabel(plain(f"RR per {per:g} {unit}"))
    ax.legend(loc="upper right")
    return ax
