"""One exposure, several outcome columns (causes of death, age groups) in one call and one tidy table.

:func:`fit_outcomes` fits :func:`airhealth.fit` once per outcome with the same options; the outcomes share
the confounder block (built once, :func:`airhealth.model.design.cached_confounders`), and every fit has the
single fit's checks and warnings. With a modifier the table has one row per outcome and level.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import pandas as pd

from .._progress import progress
from ..errors import SpecificationError
from ..model.fitting import fit
from ..model.result import FitResult
from ._rows import EFFECT_FIELDS, effect_fields, pick

__all__ = ["OUTCOME_COLUMNS", "fit_outcomes", "outcome_rows"]

#: Columns of :func:`fit_outcomes` (``group``, ``modification_p_value`` after ``outcome`` with a modifier).
OUTCOME_COLUMNS = (
    "outcome", "exposure", "lag", "per", "coef", "se", "rr", "rr_low", "rr_high", "p_value", "n_days", "dispersion",
)  # fmt: skip


def _checked_outcomes(outcomes: Any) -> list[str]:
    names = [outcomes] if isinstance(outcomes, str) else list(outcomes or [])
    if not names:
        raise SpecificationError("fit_outcomes needs a list of outcome columns, e.g. ['deaths_cvd', 'deaths_resp'].")
    bad = [n for n in names if not isinstance(n, str) or not n]
    if bad:
        raise SpecificationError(f"outcomes must be column names, got {bad[0]!r}.")
    repeated = sorted({n for n in names if names.count(n) > 1})
    if repeated:
        raise SpecificationError(f"outcome {repeated[0]!r} is named twice; give each outcome column once.")
    return names


def outcome_rows(result: FitResult, per: float = 10.0, level: float = 0.95) -> list[dict[str, Any]]:
    """The rows of one fit: one, or one per level of the modifier (with the test of equal effects)."""
    common = {"outcome": result.spec.outcome, "exposure": result.spec.exposure, "lag": result.spec.lag.label}
    stats = {"n_days": result.n_days, "dispersion": result.dispersion}
    if not result.groups:
        effect = effect_fields(result.effect(per=per, level=level))
        return [{**common, **effect, **stats}]
    test = result.modification_test()
    rows = []
    for row in result.effects_by_group(per=per, level=level).to_dict(orient="records"):
        effect = pick(row, EFFECT_FIELDS[1:])
        rows.append(
            {**common, "group": row["group"], "per": float(per), **effect, "n_days": row["n_days"],
             "dispersion": result.dispersion, "modification_p_value": test["p_value"]}
        )  # fmt: skip
    return rows


def fit_outcomes(
    data: pd.DataFrame,
    outcomes: Sequence[str],
    exposure: str,
    lag: Any = "0-1",
    per: float = 10.0,
    level: float = 0.95,
    show_progress: bool = False,
    **options: Any,
) -> pd.DataFrame:
    """Fit the same model for each outcome column and return one tidy table.

    Parameters
    ----------
    data : DataFrame
        The daily table (as for :func:`airhealth.fit`), holding every outcome column.
    outcomes : sequence of str
        Count columns (causes, age groups).
    exposure, lag : str
        As for :func:`airhealth.fit`.
    per, level : float
        Exposure increase and confidence level of the relative risks.
    show_progress : bool
        Report progress on stderr.
    **options
        Any other :class:`~airhealth.model.spec.ModelSpec` option (``temperature``, ``copollutants``,
        ``modifier``, ...).

    Returns
    -------
    DataFrame
        One row per outcome (:data:`OUTCOME_COLUMNS`); with ``modifier=...`` one row per outcome and level,
        with a ``group`` column and ``modification_p_value`` (the outcome's Wald test of equal effects).
        Each outcome uses its own usable days (``n_days``).

    Examples
    --------
    >>> import airhealth
    >>> table = airhealth.fit_outcomes(airhealth.load_sample(), ["admissions_respiratory",
    ...     "admissions_cardiovascular"], exposure="pm25", temperature="temperature")  # doctest: +SKIP
    """
    names = _checked_outcomes(outcomes)
    if "outcome" in options:
        raise SpecificationError("give the outcome columns as outcomes=[...], not outcome=...")
    rows: list[dict[str, Any]] = []
    for outcome in progress(names, label="outcomes", enabled=show_progress):
        result = fit(data, outcome=outcome, exposure=exposure, lag=lag, **options)
        rows += outcome_rows(result, per=per, level=level)
    columns = list(OUTCOME_COLUMNS)
    if options.get("modifier"):
        columns[1:1] = ["group"]
        columns.append("modification_p_value")
    return pd.DataFrame(rows, columns=columns)
