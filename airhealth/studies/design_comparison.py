"""Time series and time-stratified case-crossover side by side: the same outcome, exposure and lags.

A case-crossover estimate that agrees with the time-series estimate is reassuring: the two designs control
for season, trend and day of week in different ways (a smooth function of time against strata of year ×
month × day of week). :func:`compare_designs` fits both designs for each lag structure and returns one tidy
row per design and lag.

References
----------
Bhaskaran K, Gasparrini A, Hajat S, Smeeth L, Armstrong B (2013). Time series regression studies in
environmental epidemiology. Int J Epidemiol 42:1187–1195.
Armstrong BG, Gasparrini A, Tobias A (2014). Conditional Poisson models: a flexible alternative to
conditional logistic case cross-over analysis. BMC Med Res Methodol 14:122.
Janes H, Sheppard L, Lumley T (2005). Case-crossover analyses of air pollution exposure data: referent
selection strategies and their implications for bias. Epidemiology 16:717–726.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from ..errors import SpecificationError
from ._rows import pick
from .compare import compare_results

__all__ = ["DESIGN_COLUMNS", "TIME_SERIES_ONLY", "compare_designs"]

#: Options of the time-series model's control for time; the case-crossover's strata replace them.
TIME_SERIES_ONLY = ("seasonality", "trend_df_per_year", "fourier_pairs", "day_of_week")

#: Columns of the table :func:`compare_designs` returns, in order.
DESIGN_COLUMNS = (
    "outcome", "exposure", "lag", "design", "per", "unit", "coef", "se", "rr", "rr_low", "rr_high",
    "percent_change", "p_value", "dispersion", "family", "n_days", "n_strata",
)  # fmt: skip


def _lags_given(lags: Sequence[Any] | None, model_options: dict[str, Any]) -> list[Any]:
    """``lags``, or the one ``lag=`` among the options (taken out of them), or the default ``["0-1"]``."""
    if "lag" in model_options:
        if lags is not None:
            raise SpecificationError(
                f"compare_designs got both lag={model_options['lag']!r} and lags={lags!r}: give one lag as lag=... "
                "or several as lags=[...], not both."
            )
        lags = [model_options.pop("lag")]
    if lags is None:
        return ["0-1"]
    return [lags] if isinstance(lags, str) else list(lags)


def compare_designs(
    data: pd.DataFrame,
    outcome: str,
    exposure: str,
    lags: Sequence[Any] | None = None,
    per: float = 10.0,
    level: float = 0.95,
    show_progress: bool = False,
    **model_options: Any,
) -> pd.DataFrame:
    """Fit the time-series model and the time-stratified case-crossover for each lag; one row per fit.

    Parameters
    ----------
    data : DataFrame
        One row per day (not modified).
    outcome, exposure : str
        Columns of daily counts and of the daily pollutant level.
    lags : sequence
        Lag structures, e.g. ``["0", "0-1", "dl0-5"]`` (default ``["0-1"]``). One lag may be given as
        ``lag="0-1"`` instead (not both).
    per : float
        Exposure increase for the relative risks (default 10).
    level : float
        Confidence level (default 0.95).
    show_progress : bool
        Report progress on stderr.
    **model_options
        :class:`~airhealth.model.spec.ModelSpec` options shared by both designs (``temperature``,
        ``humidity``, ``holidays``, ``confounders``, ``overdispersion``, ...). The time-series control for
        time (``seasonality``, ``trend_df_per_year``, ``fourier_pairs``, ``day_of_week``) applies to the
        time-series fits only: the case-crossover's strata replace it. ``design`` is not accepted.

    Returns
    -------
    DataFrame
        Columns :data:`DESIGN_COLUMNS`: for each lag a ``"time-series"`` row and a ``"case-crossover"`` row
        (``n_strata`` is missing for the time-series rows). Estimates are associations, not proof of
        causation.

    Raises
    ------
    SpecificationError
        ``design`` among the options, or an option the case-crossover cannot honour (e.g.
        ``family="negbin"``, ``interval="hac"``), naming it.
    """
    if "design" in model_options:
        raise SpecificationError("compare_designs fits both designs: remove the design option.")
    lags = _lags_given(lags, model_options)
    common = dict(outcome=outcome, exposure=exposure, show_progress=show_progress)
    strata_options = {k: v for k, v in model_options.items() if k not in TIME_SERIES_ONLY}
    fits = {
        "time-series": compare_results(data, lags, design="time-series", **common, **model_options),
        "case-crossover": compare_results(data, lags, design="case-crossover", **common, **strata_options),
    }
    rows = []
    for i in range(len(lags)):
        for results in fits.values():
            record = results[i].to_dict(per=per, level=level)
            record.setdefault("n_strata", np.nan)
            rows.append(pick(record, DESIGN_COLUMNS))
    return pd.DataFrame(rows, columns=list(DESIGN_COLUMNS))
