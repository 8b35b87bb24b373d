"""The first-stage table as flat columns (for CSV files) and back.

A distributed lag's vector ``lag_coefs`` (p coefficients of the lag basis) becomes columns ``basis_coef_0`` …
``basis_coef_{p-1}``, and its covariance ``lag_cov`` the columns ``basis_cov_i_j`` for ``i <= j`` (the upper
triangle; the matrix is symmetric). Rows of cities that failed leave them empty. :func:`unflatten` restores
``lag_coefs``/``lag_cov``, so :func:`airhealth.cities.lag_vectors` works on a table read back from CSV.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from ..errors import DataError

__all__ = ["flatten", "unflatten"]

_COEF = re.compile(r"^basis_coef_(\d+)$")


def flatten(table: pd.DataFrame) -> pd.DataFrame:
    """A copy of ``table`` with ``lag_coefs``/``lag_cov`` (if present) spread into numeric columns."""
    if "lag_coefs" not in table.columns:
        return table.copy()
    vectors = [v for v in table["lag_coefs"] if isinstance(v, np.ndarray)]
    p = len(vectors[0]) if vectors else 0
    columns: dict[str, list[float]] = {f"basis_coef_{j}": [] for j in range(p)}
    pairs = [(i, j) for i in range(p) for j in range(i, p)]
    columns.update({f"basis_cov_{i}_{j}": [] for i, j in pairs})
    for coef, cov in zip(table["lag_coefs"], table["lag_cov"], strict=True):
        ok = isinstance(coef, np.ndarray)
        for j in range(p):
            columns[f"basis_coef_{j}"].append(float(coef[j]) if ok else np.nan)
        for i, j in pairs:
            columns[f"basis_cov_{i}_{j}"].append(float(cov[i, j]) if ok else np.nan)
    flat = table.drop(columns=["lag_coefs", "lag_cov"])
    return pd.concat([flat.reset_index(drop=True), pd.DataFrame(columns)], axis=1)


def unflatten(flat: pd.DataFrame) -> pd.DataFrame:
    """The inverse of :func:`flatten`: ``basis_coef_*``/``basis_cov_*`` columns back to arrays per city."""
    p = sum(1 for c in flat.columns if _COEF.match(str(c)))
    if p == 0:
        return flat.copy()
    needed = [f"basis_coef_{j}" for j in range(p)] + [f"basis_cov_{i}_{j}" for i in range(p) for j in range(i, p)]
    missing = [c for c in needed if c not in flat.columns]
    if missing:
        raise DataError(f"the estimates have {p} basis coefficients but lack the columns {missing[:5]}.")
    coefs, covs = [], []
    for _, row in flat[needed].iterrows():
        values = row.to_numpy(dtype=float)
        if np.isnan(values).all():
            coefs.append(np.nan)
            covs.append(np.nan)
            continue
        cov = np.empty((p, p))
        iu = np.triu_indices(p)
        cov[iu] = values[p:]
        cov.T[iu] = values[p:]
        coefs.append(values[:p])
        covs.append(cov)
    out = flat.drop(columns=needed)
    out["lag_coefs"] = coefs
    out["lag_cov"] = covs
    return out
