"""Fit many lag structures on the same data through the shared-work path; one tidy row per structure.

All structures share the validated frame and the confounder block of the design (built once), and each
fit starts from the confounder-only fit.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import pandas as pd

from .._progress import progress
from .design import build_confounders, build_design, model_frame
from .fitting import fit_design, result_from_fit
from .result import FitResult
from .spec import ModelSpec

__all__ = ["compare", "compare_results"]

COMPARE_COLUMNS = [
    "outcome",
    "exposure",
    "lag",
    "per",
    "coef",
    "se",
    "rr",
    "rr_low",
    "rr_high",
    "percent_change",
    "p_value",
    "dispersion",
    "qaic",
    "n_days",
]


def compare_results(
    data: pd.DataFrame, lags: Sequence[Any], show_progress: bool = False, **model_options: Any
) -> list[FitResult]:
    """Fit every lag structure in ``lags`` with the same other options; return the results in order."""
    if not lags:
        from ..errors import SpecificationError

        raise SpecificationError("compare needs at least one lag structure in lags=[...].")
    specs = [ModelSpec.from_options(lag=lag, **model_options) for lag in lags]
    deepest = max(specs, key=lambda s: s.lag.max_lag)
    frame = model_frame(data, deepest)
    confounders = build_confounders(frame, specs[0])
    results = []
    for spec in progress(specs, label="lag structures", enabled=show_progress):
        design = build_design(frame, spec, confounders)
        results.append(result_from_fit(design, spec, fit_design(design, spec)))
    return results


def compare(
    data: pd.DataFrame,
    lags: Sequence[Any],
    per: float = 10.0,
    level: float = 0.95,
    show_progress: bool = False,
    **model_options: Any,
) -> pd.DataFrame:
    """Compare lag structures for one outcome and exposure: one row per structure.

    Parameters
    ----------
    data : DataFrame
        Daily data, as for :func:`airhealth.fit`.
    lags : sequence
        Lag structures (strings such as ``"0"``, ``"0-1"``, ``"dl0-5"`` or objects).
    per : float
        Exposure increase for the relative risks (default 10).
    level : float
        Confidence level of the intervals.
    show_progress : bool
        Report progress on stderr.
    **model_options
        ``outcome``, ``exposure`` and any other :class:`~airhealth.model.spec.ModelSpec` option.

    Returns
    -------
    DataFrame
        Columns ``lag, coef, se, rr, rr_low, rr_high, percent_change, p_value, dispersion, qaic, n_days``
        (and ``outcome``, ``exposure``, ``per``). Each row equals the corresponding single fit.

    Examples
    --------
    >>> import airhealth
    >>> table = airhealth.compare(airhealth.load_sample(), lags=["0", "1", "0-1"], outcome="deaths_all",
    ...                           exposure="pm25", temperature="temperature")
    >>> list(table["lag"])
    ['0', '1', '0-1']
    """
    results = compare_results(data, lags, show_progress=show_progress, **model_options)
    rows = [r.to_dict(per=per, level=level) for r in results]
    table = pd.DataFrame(rows)
    return table[[c for c in COMPARE_COLUMNS if c in table.columns]].reset_index(drop=True)
