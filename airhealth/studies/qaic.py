"""QAIC of several models with one common dispersion (the largest model's), for comparison tables.

The quasi-likelihood AIC of a model with Poisson log-likelihood ``log L``, ``p`` coefficients and
dispersion (variance-inflation factor) ``c`` is

.. math::

    \\mathrm{QAIC} = -2 \\log L / c + 2 p .

Computed with each model's own estimate of ``c`` (Peng, Dominici & Louis 2006; the ``qaic`` of
:class:`~airhealth.model.result.FitResult`), the criterion rewards a model twice for explaining
extra-Poisson variation: once in ``log L`` and once in a smaller ``c``. Burnham & Anderson (2002,
section 6.2) estimate ``c`` once, from the most general ("global") model of the set, and use that one
value for every model; models are then ranked by ``-2 log L`` penalised by ``2 p`` on the same scale.
Here the most general model is the one with the most coefficients (the first such row, in the table's
order, when several have as many). Burnham & Anderson also count ``c`` as one more parameter; that adds
the same 2 to every model and changes no difference, so it is left out, as in the ``qaic`` column.

Only the quasi-Poisson family has a dispersion: for Poisson and negative binomial fits the ``qaic``
column is the AIC and ``qaic_common`` equals it (``c = 1``).

References
----------
Burnham KP, Anderson DR (2002). *Model Selection and Multimodel Inference*, 2nd ed. Springer,
section 6.2 (overdispersed count data: QAIC with a variance-inflation factor from the global model).
Peng RD, Dominici F, Louis TA (2006). Model choice in time series studies of air pollution and
mortality. J R Stat Soc A 169:179–203.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

__all__ = ["add_common_qaic", "common_qaic"]


def common_qaic(loglik: np.ndarray, n_params: np.ndarray, dispersion: float) -> np.ndarray:
    """``-2 log L / c + 2 p`` for every model with one dispersion ``c``.

    Examples
    --------
    >>> common_qaic(np.array([-100.0, -98.0]), np.array([3, 5]), 2.0)
    array([106., 108.])
    """
    return -2.0 * np.asarray(loglik, dtype=float) / float(dispersion) + 2.0 * np.asarray(n_params, dtype=float)


def add_common_qaic(table: pd.DataFrame, quasi: bool = True) -> tuple[pd.DataFrame, dict[str, Any]]:
    """Add ``qaic_common``, ``delta_qaic_common``, ``common_dispersion`` and ``qaic_common_from``.

    ``table`` needs the columns ``lag``, ``trend_df_per_year``, ``n_params``, ``dispersion``, ``loglik``
    and ``qaic`` (each model's own); ``loglik`` is removed. ``quasi``: whether the models are quasi-Poisson
    (otherwise ``qaic`` is the AIC and is copied). Returns the new table and a description of the
    model whose dispersion is used (``lag``, ``trend_df_per_year``, ``n_params``, ``dispersion``).
    """
    out = table.copy()
    reference = int(np.argmax(out["n_params"].to_numpy()))  # first of the largest models
    row = out.iloc[reference]
    dispersion = float(row["dispersion"]) if quasi else 1.0
    out["qaic_common"] = common_qaic(out["loglik"], out["n_params"], dispersion) if quasi else out["qaic"]
    out["delta_qaic_common"] = out["qaic_common"] - out["qaic_common"].min()
    out["common_dispersion"] = dispersion
    label = f"lag {row['lag']}, {row['trend_df_per_year']:g} df/year ({int(row['n_params'])} coefficients)"
    out["qaic_common_from"] = label if quasi else "none: the family has no dispersion (AIC)"
    described = {
        "lag": row["lag"], "trend_df_per_year": _plain(row["trend_df_per_year"]), "n_params": int(row["n_params"]),
        "dispersion": dispersion, "label": label if quasi else None,
    }  # fmt: skip
    return out.drop(columns="loglik"), described


def _plain(value: Any) -> Any:
    """A numpy scalar as the Python number it holds (for JSON and display)."""
    return value.item() if hasattr(value, "item") else value
