"""Single- vs two-pollutant estimates of one exposure, on the days every model can use.

:func:`copollutant_table` fits the exposure alone and then with each co-pollutant in turn (at the
exposure's lag structure, :mod:`airhealth.model.bases.copollutant`), every model on the same days, so that
a change in the estimate reflects the adjustment and not different days. Each model goes through the
single fit's checks and warnings (``model_frame``, ``build_design``, ``warn_if_suspicious``) and the one
fitting sequence (``fitted_result``), so each row equals ``airhealth.fit`` on the same days.

References
----------
Bhaskaran K, Gasparrini A, Hajat S, Smeeth L, Armstrong B (2013). Time series regression studies in
environmental epidemiology. Int J Epidemiol 42:1187–1195 (two-pollutant models as a sensitivity analysis).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from .._progress import progress
from ..errors import DataError, SpecificationError
from ..model.design import build_design, model_frame
from ..model.fitting import fitted_result
from ..model.result import FitResult
from ..model.spec import ModelSpec
from ._rows import effect_fields, restrict_to_days

__all__ = ["COPOLLUTANT_COLUMNS", "copollutant_table"]

#: Columns of :func:`copollutant_table`.
COPOLLUTANT_COLUMNS = (
    "exposure", "adjusted_for", "lag", "per", "coef", "se", "rr", "rr_low", "rr_high", "p_value", "correlation",
    "n_days",
)  # fmt: skip

#: Reason recorded for days left out only to put every model on the same days.
NOT_COMMON = "not usable by every model of the co-pollutant table"


def _checked_names(copollutants: Any, exposure: str) -> tuple[str, ...]:
    names = (copollutants,) if isinstance(copollutants, str) else tuple(copollutants or ())
    if not names:
        raise SpecificationError("copollutant_table needs at least one co-pollutant, e.g. copollutants=['no2'].")
    return names


def copollutant_fits(
    data: pd.DataFrame, exposure: str, copollutants: Sequence[str], show_progress: bool = False, **options: Any
) -> list[FitResult]:
    """The single-pollutant fit, then one two-pollutant fit per co-pollutant, all on the common days."""
    names = _checked_names(copollutants, exposure)
    given = options.pop("copollutants", None)
    if given:
        raise SpecificationError("give the co-pollutants once, as copollutant_table(..., copollutants=[...]).")
    everything = ModelSpec.from_options(exposure=exposure, copollutants=names, **options)
    units = dict(zip(everything.copollutants, everything.copollutant_units, strict=True))
    specs = [everything.replace(copollutants=(), copollutant_units=())]
    specs += [everything.replace(copollutants=(c,), copollutant_units=(units[c],)) for c in names]
    frame = model_frame(data, everything)  # every column checked once, with the guards of a single fit
    designs = [build_design(frame, spec) for spec in specs]
    keep = np.logical_and.reduce([d.used for d in designs])
    p = max(d.matrix.shape[1] for d in designs)
    if keep.sum() <= p:
        raise DataError(
            f"only {int(keep.sum())} days have the outcome, {exposure!r} and every co-pollutant "
            f"({', '.join(names)}), too few for {p} parameters; drop a co-pollutant with many missing days."
        )
    results = []
    for spec, design in progress(list(zip(specs, designs, strict=True)), label="co-pollutants", enabled=show_progress):
        results.append(fitted_result(restrict_to_days(design, keep, NOT_COMMON), spec)[0])
    return results


def copollutant_table(
    data: pd.DataFrame,
    exposure: str,
    copollutants: Sequence[str],
    outcome: str,
    lag: Any = "0-1",
    per: float = 10.0,
    level: float = 0.95,
    show_progress: bool = False,
    **options: Any,
) -> pd.DataFrame:
    """The exposure's relative risk alone and adjusted for each co-pollutant, on common days.

    Parameters
    ----------
    data : DataFrame
        The daily table (as for :func:`airhealth.fit`).
    exposure : str
        The pollutant whose effect is estimated.
    copollutants : sequence of str
        Pollutants adjusted for, one at a time, each at the exposure's lag structure.
    outcome, lag : str
        As for :func:`airhealth.fit`.
    per, level : float
        Exposure increase and confidence level of the relative risks.
    show_progress : bool
        Report progress on stderr.
    **options
        Any other :class:`~airhealth.model.spec.ModelSpec` option (``temperature``, ``units``, ...).

    Returns
    -------
    DataFrame
        One row per model (:data:`COPOLLUTANT_COLUMNS`): ``adjusted_for`` is ``None`` for the single-pollutant
        model, else the co-pollutant; ``correlation`` is that of the exposure and the co-pollutant on the
        days used; every model uses the same ``n_days``.

    Raises
    ------
    SpecificationError
        A co-pollutant that is the exposure or nearly collinear with it (|r| > 0.95), no co-pollutant.
    DataError
        Too few days with every pollutant present.

    Examples
    --------
    >>> import airhealth
    >>> table = airhealth.copollutant_table(airhealth.load_sample(), exposure="pm25",
    ...     copollutants=["no2", "o3"], outcome="deaths_all", temperature="temperature")  # doctest: +SKIP
    """
    fits = copollutant_fits(data, exposure, copollutants, show_progress, outcome=outcome, lag=lag, **options)
    rows = []
    for result in fits:
        effect = effect_fields(result.effect(per=per, level=level))
        adjusted = result.spec.copollutants[0] if result.spec.copollutants else None
        r = result.copollutant_correlations[0] if adjusted else np.nan
        rows.append(
            {"exposure": exposure, "adjusted_for": adjusted, "lag": result.spec.lag.label, **effect,
             "correlation": r, "n_days": result.n_days}
        )  # fmt: skip
    return pd.DataFrame(rows, columns=list(COPOLLUTANT_COLUMNS))
