"""The report section of a multi-city analysis: the pooled table, the forest plot and the pooled lag curve.

Built from the results of :func:`airhealth.pool` (and optionally :func:`airhealth.pool_multivariate`) as
plain :mod:`~airhealth.report.document` blocks, so any writer (the HTML report) lays it out.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import pandas as pd

from ..errors import SpecificationError
from .document import Figure, Section, Table, Text
from .forest_plot import forest_figure, pooled_forest_table, pooled_summary
from .labels import display_name
from .pooled_lag_plot import plot_pooled_lag_curve, pooled_lag_curve

__all__ = ["cities_section"]

_METHOD = {
    "reml": "random-effects meta-analysis with the between-city variance τ² estimated by restricted maximum "
    "likelihood (Viechtbauer 2005)",
    "dl": "random-effects meta-analysis with the DerSimonian–Laird estimate of the between-city variance τ² "
    "(DerSimonian & Laird 1986)",
    "fixed": "fixed-effect (inverse-variance) meta-analysis, assuming one common effect (τ² = 0)",
}


def _method_text(pooled: Any, per: float, unit: str) -> str:
    level = f"{pooled.level:.0%}"
    return (
        f"City estimates ({pooled.k} cities) were pooled by {_METHOD.get(pooled.method, pooled.method)}. "
        f"Relative risks are per {per:g} {unit} with {level} Wald intervals; the prediction interval is the "
        "range expected for the effect in a new city (Higgins, Thompson & Spiegelhalter 2009). I² is the share "
        "of the variation between city estimates beyond chance (Higgins & Thompson 2002). Weights are each "
        "city's share of the inverse-variance weights 1/(v + τ²). These are statistical associations, not proof "
        "of causation."
    )


def _pooled_table(pooled: Any, unit: str) -> pd.DataFrame:
    d = pooled.to_dict()
    keys = ["method", "k", "rr", "rr_low", "rr_high", "rr_pi_low", "rr_pi_high", "tau2", "i2", "q", "q_df", "q_p"]
    row = {key: d[key] for key in keys if key in d}
    return pd.DataFrame([{"per": f"{pooled.per:g} {unit}", **row}])


def _lag_blocks(lag_pool: Any, basis: Any, lags: Any, per: float, unit: str, level: float) -> list[Any]:
    curve = pooled_lag_curve(lag_pool, basis, lags, per, level)
    ax = plot_pooled_lag_curve(lag_pool, basis, lags, per=per, unit=unit, level=level)
    return [
        Table(f"Pooled relative risk per {per:g} {unit} at each lag", curve, "pooled_lag_curve"),
        Figure(
            f"Pooled lag–response curve: relative risk per {per:g} {unit} at each lag",
            ax.figure,
            "pooled_lag_curve",
            note=f"Black line and blue band: the pooled curve and its {level:.0%} interval ({lag_pool.method}, "
            f"{lag_pool.k} cities). Grey lines: each city's curve shrunk towards the pooled one (best linear "
            "unbiased predictions).",
        ),
    ]


def _unit(pooled: Any, unit: str | None) -> str:
    """The exposure unit: given, else the pooled result's, else an error naming the fix."""
    unit = unit if unit is not None else getattr(pooled, "unit", None)
    if unit is None:
        raise SpecificationError(
            "cities_section cannot tell the exposure unit: the pooled result carries none. "
            "Pass unit, e.g. cities_section(pooled, unit='µg/m³')."
        )
    return str(unit)


def _panel_name(pooled: Any, per: float, unit: str) -> str:
    """A single pool's forest panel title: its outcome and exposure when known, else what the RR is per."""
    named = [str(v) for v in (getattr(pooled, "outcome", None), getattr(pooled, "exposure", None)) if v]
    return " and ".join(named) if named else f"all cities, RR per {per:g} {unit}"


def cities_section(
    pooled: Any | Mapping[str, Any],
    unit: str | None = None,
    labels: Mapping[str, str] | None = None,
    lag_pool: Any = None,
    basis: Any = None,
    lags: Any = None,
    title: str = "Many cities: pooled estimates",
) -> Section:
    """A report section: method text, pooled table(s), city table, forest plot (shared scale), lag curve.

    Parameters
    ----------
    pooled : PooledEffect or mapping of name → PooledEffect
        From :func:`airhealth.pool`; a mapping (e.g. outcome → pool) gives one forest panel per entry, all
        on one x-scale. A single pool's panel is titled by its ``outcome``/``exposure`` when it carries
        them, else "all cities, RR per 10 µg/m³".
    unit : str, optional
        Exposure unit for "per 10 µg/m³" labels; by default the pooled result's ``unit``. Required (an error
        says so) when the pooled result carries none.
    labels : mapping, optional
        Display names of cities and panel names.
    lag_pool : MultivariatePooled, optional
        From :func:`airhealth.pool_multivariate`: adds the pooled lag–response table and figure.
    basis, lags : optional
        The lag basis matrix and lag days of ``lag_pool`` (default: one coefficient per lag day 0, 1, ...).
    """
    first = next(iter(pooled.values())) if isinstance(pooled, Mapping) and pooled else pooled
    unit = _unit(first, unit)
    per, level = first.per, first.level
    pools = dict(pooled) if isinstance(pooled, Mapping) else {_panel_name(first, per, unit): pooled}
    blocks: list[Any] = [Text(_method_text(first, per, unit))]
    summary = pd.concat([_pooled_table(p, unit).assign(name=n) for n, p in pools.items()], ignore_index=True)
    summary = summary[["name", *[c for c in summary.columns if c != "name"]]]
    summary["name"] = [display_name(n, labels) for n in summary["name"]]
    blocks.append(Table("Pooled estimates and heterogeneity", summary, "pooled_estimates"))
    cities = pd.concat([p.blup().assign(name=display_name(n, labels)) for n, p in pools.items()], ignore_index=True)
    blocks.append(Table("City estimates, weights and shrunken estimates", cities, "city_estimates", display=False))
    panels = {n: (pooled_forest_table(p), pooled_summary(p)) for n, p in pools.items()}
    xlabel = f"relative risk per {per:g} {unit} (log scale)"
    figure = forest_figure(panels, labels=labels, xlabel=xlabel, level=level)
    blocks.append(
        Figure(
            f"City and pooled relative risks per {per:g} {unit}",
            figure,
            "forest_cities",
            note="Squares: city estimates (area proportional to the weight); lines: their intervals; diamond: "
            "the pooled estimate and its interval; orange bar: the prediction interval for a new city.",
        )
    )
    if lag_pool is not None:
        blocks += _lag_blocks(lag_pool, basis, lags, per, unit, level)
    return Section(title, blocks)
