"""The many-cities report: the pooled estimate, the forest plot and, for distributed lags, the pooled lag curve.

:func:`write_cities_report` turns a first-stage table (from :func:`airhealth.fit_cities`, or its CSV read
back) into an HTML report through :func:`~airhealth.report.cities_section.cities_section`: the pooling is
:func:`airhealth.pool` and, when the table holds lag vectors, :func:`airhealth.pool_multivariate`; nothing
is recomputed here. ``airhealth pool ESTIMATES.csv --report DIR`` calls it. The tables hold estimates,
standard errors and days used, no health counts, so small-count suppression has nothing to hide.

References
----------
DerSimonian R, Laird N (1986). Meta-analysis in clinical trials. Control Clin Trials 7:177–188.
Gasparrini A, Armstrong B, Kenward MG (2012). Multivariate meta-analysis for non-linear and other
multi-parameter associations. Stat Med 31:3821–3839.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from .cities_section import cities_section
from .document import Section, Text
from .html import write_html_report

__all__ = ["lag_curve_pool", "write_cities_report"]


def lag_curve_pool(estimates: pd.DataFrame, method: str = "reml") -> Any:
    """The multivariate pool of the cities' lag vectors, or None when the table holds none.

    ``estimates``: the first-stage table, with ``lag_coefs``/``lag_cov`` or their flat CSV columns
    (:func:`airhealth.cities.estimates_table.unflatten`). ``method``: ``"reml"``, else the method of moments.
    """
    from ..cities.estimates_table import unflatten
    from ..cities.first_stage import lag_vectors
    from ..cities.multivariate import pool_multivariate

    table = estimates if "lag_coefs" in estimates.columns else unflatten(estimates)
    if "lag_coefs" not in table.columns:
        return None
    if "error" not in table.columns:
        table = table.assign(error="")
    coefs, covs = lag_vectors(table)
    return pool_multivariate(coefs, covs, method="reml" if method == "reml" else "mm")


def write_cities_report(
    pooled: Any,
    out: str | Path,
    *,
    unit: str = "units",
    lag_pool: Any = None,
    basis: Any = None,
    lags: Any = None,
    title: str = "Many cities: pooled estimates",
    notes: tuple[str, ...] = (),
) -> Path:
    """Write the many-cities report (``out/index.html`` with its tables and figures); returns the page's path.

    Parameters
    ----------
    pooled : PooledEffect
        From :func:`airhealth.pool`.
    out : path
        Output folder (as for :func:`airhealth.write_report`).
    unit : str
        The exposure's unit for the "per 10 µg/m³" labels.
    lag_pool, basis, lags : optional
        From :func:`lag_curve_pool` (or :func:`airhealth.pool_multivariate`), the lag basis matrix and the lag
        days (``table.attrs["lag_basis"]``/``["lags"]`` of the first stage, or its JSON file): add the pooled
        lag–response table and figure.
    title : str
        Page heading.
    notes : tuple of str
        Paragraphs shown first (e.g. the cities left out).
    """
    basis = None if basis is None else np.asarray(basis, dtype=float)
    section = cities_section(pooled, unit=unit, lag_pool=lag_pool, basis=basis, lags=lags, title=title)
    blocks = [*(Text(n) for n in notes), *section.blocks]
    return write_html_report([Section(section.title, blocks)], out, title=title)
