r"""Data-driven choice of the df per year of the time spline: minimum QAIC or least residual autocorrelation.

For each candidate ``d`` (df per year) the main model is fitted (through the sweep engine,
:func:`airhealth.studies.sweep.sweep_results`, as :func:`airhealth.fit` fits it) and two criteria are
computed:

* **QAIC** (Peng, Dominici & Louis 2006): :math:`-2\ell/\hat\phi + 2p`, with each model's own dispersion
  (the fit's ``qaic``); the chosen ``d`` minimises it. A change of the time df does not change the days used,
  so the values are comparable.
* **Sum of absolute residual partial autocorrelations** (the multi-city European protocol; Touloumi et al.
  2004, from memory): :math:`\sum_{k=1}^{K} |\mathrm{pacf}_k|` of the deviance residuals on the calendar,
  :math:`K` = ``max_lag`` (default 30); the chosen ``d`` minimises it. The partial autocorrelations are those
  of :func:`airhealth.diagnose` (calendar-aware; without gaps, statsmodels ``pacf(method="ldb")``).

Ties go to the first candidate in the order given. Values for which
the model cannot be fitted (too few days per parameter) keep their row with the message and are not chosen.

References
----------
Peng RD, Dominici F, Louis TA (2006). Model choice in time series studies of air pollution and mortality.
J R Stat Soc A 169:179–203.
Touloumi G, Atkinson R, Le Tertre A, et al. (2004). Analysis of health outcome time series data in
epidemiological studies. Environmetrics 15:101–117 (the choice of smoothness that minimises residual
partial autocorrelation in the multi-city European protocol; from memory, not verified).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
import pandas as pd

from .._choices import check_choice
from ..errors import AirhealthError, FitError, SpecificationError
from ..model.result import FitResult
from ..model.spec import ModelSpec
from .diagnostics import _autocorrelation
from .sweep import sweep_results

__all__ = ["TimeDfChoice", "TimeDfCriterion", "choose_time_df"]

TimeDfCriterion = Literal["qaic", "pacf"]
_COLUMNS = ["trend_df_per_year", "qaic", "sum_abs_pacf", "coef", "rr", "rr_low", "rr_high", "n_days", "chosen", "error"]


@dataclass(frozen=True)
class TimeDfChoice:
    """The df per year chosen and the table behind the choice.

    Attributes
    ----------
    chosen : float
        The df per year of the time spline that minimises ``criterion``.
    criterion : {"qaic", "pacf"}
        The criterion used.
    max_lag : int
        Lags summed in ``sum_abs_pacf``.
    table : DataFrame
        One row per candidate: ``trend_df_per_year, qaic, sum_abs_pacf, coef, rr, rr_low, rr_high, n_days,
        chosen, error`` (relative risks per ``per`` units; ``error`` holds the message of a candidate that
        could not be fitted). A copy on every access, so changing it cannot change the choice.
    """

    chosen: float
    criterion: TimeDfCriterion
    max_lag: int
    _table: pd.DataFrame

    @property
    def table(self) -> pd.DataFrame:
        return self._table.copy(deep=True)

    def _repr_html_(self) -> str:
        head = f"<p>time df per year chosen by {self.criterion}: <b>{self.chosen:g}</b></p>"
        return head + self._table.to_html(index=False, float_format=lambda v: f"{v:.4g}")


def _row(value: Any, outcome: FitResult | AirhealthError, max_lag: int, per: float, level: float) -> dict:
    if isinstance(outcome, AirhealthError):
        return {"trend_df_per_year": value, "error": str(outcome)}
    record = outcome.to_dict(per=per, level=level)
    pacf = _autocorrelation(outcome.residuals("deviance"), max_lag)["pacf"].to_numpy()
    return {
        "trend_df_per_year": value, "qaic": record["qaic"], "sum_abs_pacf": float(np.abs(pacf).sum()),
        **{c: record[c] for c in ("coef", "rr", "rr_low", "rr_high", "n_days")}, "error": None,
    }  # fmt: skip


def choose_time_df(
    data: pd.DataFrame,
    outcome: str,
    exposure: str,
    lag: Any = "0-1",
    values: Sequence[float] = range(2, 13),
    criterion: TimeDfCriterion = "qaic",
    max_lag: int = 30,
    per: float = 10.0,
    level: float = 0.95,
    show_progress: bool = False,
    **model_options: Any,
) -> TimeDfChoice:
    """Choose the df per year of the time spline by minimum QAIC or minimum residual partial autocorrelation.

    Parameters
    ----------
    data : DataFrame
        Daily data, as for :func:`airhealth.fit`.
    outcome, exposure : str
        Columns of daily counts and of the pollutant.
    lag : str or LagStructure
        Lag of the exposure (default ``"0-1"``).
    values : sequence of float
        Candidate df per year (default 2 to 12).
    criterion : {"qaic", "pacf"}
        ``"qaic"``: minimum QAIC; ``"pacf"``: minimum sum of absolute partial autocorrelations of the
        deviance residuals at lags 1 to ``max_lag``.
    max_lag : int
        Lags of the partial autocorrelation sum (default 30; at most a quarter of the days used).
    per, level : float
        Exposure increase for the relative risks in the table, and the confidence level.
    show_progress : bool
        Report progress on stderr.
    **model_options
        Other options of the model (``temperature``, ...), not ``trend_df_per_year``.

    Returns
    -------
    TimeDfChoice
        ``chosen``, ``criterion``, ``max_lag`` and the ``table`` of both criteria per candidate.

    Raises
    ------
    SpecificationError
        An empty list of values, an unknown criterion, ``max_lag`` not a whole number from 1 to a quarter
        of the days used, or ``seasonality="fourier"`` (no time spline).
    FitError
        When no candidate can be fitted, for different reasons (listed); when every candidate fails for the
        same reason (e.g. a missing column), that error itself.

    Examples
    --------
    >>> import airhealth
    >>> choice = airhealth.choose_time_df(airhealth.load_sample(), outcome="deaths_all", exposure="pm25",
    ...                                   temperature="temperature", values=[4, 7, 10])
    >>> choice.chosen in (4, 7, 10)
    True
    """
    check_choice("criterion", criterion, TimeDfCriterion)
    if model_options.get("seasonality", "spline") != "spline":
        raise SpecificationError("choose_time_df chooses the df of the time spline; it needs seasonality='spline'.")
    if isinstance(max_lag, bool) or not isinstance(max_lag, int | np.integer) or max_lag < 1:
        raise SpecificationError(f"max_lag must be a whole number of days >= 1, got {max_lag!r}.")
    options = {"outcome": outcome, "exposure": exposure, "lag": lag, **model_options}
    if getattr(ModelSpec.from_options(**options).lag, "is_nonlinear", False):
        raise SpecificationError(
            f"lag {lag!r} is a non-linear exposure-response term, which has no single relative risk for the table; "
            "choose the time df with a single-day, moving-average or distributed lag."
        )
    rows, errors = [], []
    for value, result in sweep_results(data, "trend_df_per_year", list(values), "keep", show_progress, **options):
        if isinstance(result, AirhealthError):
            errors.append(result)
        if isinstance(result, FitResult) and max_lag > result.n_days // 4:
            raise SpecificationError(
                f"max_lag={max_lag} must be at most a quarter of the {result.n_days} days used "
                f"({result.n_days // 4}); longer lags rest on too few pairs of days."
            )
        rows.append(_row(value, result, int(max_lag), per, level))
    table = pd.DataFrame(rows, columns=_COLUMNS)
    column = "qaic" if criterion == "qaic" else "sum_abs_pacf"
    scores = table[column].to_numpy(dtype=float)
    if np.isnan(scores).all():
        distinct = list(dict.fromkeys(str(e) for e in errors))
        if len(distinct) == 1:  # the data or options fail whatever the df: the single fit's own error
            raise errors[0]
        raise FitError(f"no candidate df per year could be fitted: {'; '.join(distinct)}")
    best = int(np.nanargmin(scores))  # the first minimum: candidates keep the given order
    table["chosen"] = np.arange(len(table)) == best
    return TimeDfChoice(float(table.loc[best, "trend_df_per_year"]), criterion, int(max_lag), table)
