"""Sensitivity sweeps: refit one model over several values of one option; one tidy row per value.

A sweep over an option of the confounder model (``trend_df_per_year``, ``temperature_df``, ...) changes
the confounder block, so the shared-work path of :mod:`airhealth.studies.compare` does not apply. What is
shared here: the validated daily frame (validated once per distinct set of columns and lag depth) and
warm starts: when a value gives the same design columns as the previous one (e.g. a sweep over ``tol``)
the fit starts from the previous coefficients. The converged estimates do not depend on the start, so
every row equals the corresponding single :func:`airhealth.fit`. Every value is checked as a single fit is
(``model_frame``, ``build_design``, ``warn_if_suspicious``), so a sweep gives the single fits' warnings and
errors. With ``on_error="keep"`` a value whose fit fails (e.g. too few days for its parameters) gives a row
with missing numbers and the error's message in ``error``, and the other values are still fitted; the
default, ``"raise"``, stops at the first failure with the single fit's error.
BLAS threads follow the fitting path's policy (:func:`airhealth._threads.fitting_threads`).

References
----------
Peng RD, Dominici F, Louis TA (2006). Model choice in time series studies of air pollution and
mortality. J R Stat Soc A 169:179–203 (sensitivity of the estimates to the df of the time spline).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterator, Sequence
from typing import Any, Literal

import pandas as pd

from .._choices import check_choice
from .._progress import progress
from .._threads import design_threads, fitting_threads
from ..errors import AirhealthError, SpecificationError
from ..model.design import build_confounders, build_design, model_frame
from ..model.fitting import fit_with_residual_lags, result_from_fit, warn_if_suspicious
from ..model.group_effects import require_one_effect
from ..model.result import FitResult
from ..model.spec import ModelSpec
from .compare import COMPARE_COLUMNS

__all__ = ["OnError", "sweep", "sweep_results"]

#: What a sweep does when one value cannot be fitted: raise its error, or keep a row holding the message.
OnError = Literal["raise", "keep"]


def _checked_specs(option: str, values: Sequence[Any], model_options: dict[str, Any]) -> list[ModelSpec]:
    """One validated spec per value (a bad option or value is an error before anything is fitted)."""
    valid = {f.name for f in dataclasses.fields(ModelSpec)}
    if option not in valid:
        raise SpecificationError(f"unknown model option {option!r}; valid options are: {', '.join(sorted(valid))}.")
    if option in model_options:
        raise SpecificationError(f"{option!r} is swept over values=[...]; do not also pass it as an option.")
    if isinstance(values, str) or not hasattr(values, "__len__") or len(values) == 0:
        raise SpecificationError(
            f"values must be a non-empty list of values for {option!r}, e.g. [4, 6, 8]; got {values!r}."
        )
    return [ModelSpec.from_options(**{option: value}, **model_options) for value in values]


def sweep_results(
    data: pd.DataFrame,
    option: str,
    values: Sequence[Any],
    on_error: OnError = "raise",
    show_progress: bool = False,
    **model_options: Any,
) -> Iterator[tuple[Any, FitResult | AirhealthError]]:
    """Fit the model once per value of ``option``; yield ``(value, result)`` in order.

    The engine of :func:`sweep` (see the module notes). With ``on_error="keep"`` a value whose data checks,
    design or fit fail yields ``(value, error)`` instead of raising; invalid values of the option itself are
    errors before anything is fitted.
    """
    check_choice("on_error", on_error, OnError)
    specs = _checked_specs(option, values, model_options)
    frames: dict[tuple, tuple[pd.DataFrame, dict]] = {}  # validated frame and its built terms, by columns
    previous = None
    for value, spec in progress(list(zip(values, specs, strict=True)), label=option, enabled=show_progress):
        try:
            result, previous = _fit_one(data, spec, frames, previous)
        except AirhealthError as error:
            if on_error == "raise":
                raise
            yield value, error
            continue
        yield value, result


def _fit_one(data: pd.DataFrame, spec: ModelSpec, frames: dict[tuple, tuple], previous: Any) -> tuple:
    """One value's fit, sharing validated frames and the confounder terms the values have in common (a df
    sweep of the time spline builds the temperature splines once), warm-starting from ``previous`` when the
    columns agree."""
    key = (spec.columns_used(), spec.lag.max_lag)
    with design_threads(len(data)):
        if key not in frames:
            frames[key] = (model_frame(data, spec), {})
        frame, built = frames[key]
        design = build_design(frame, spec, build_confounders(frame, spec, built))
    start = previous.coef if previous is not None and previous.column_names == design.column_names else None
    with fitting_threads(*design.matrix.shape):
        design, glm = fit_with_residual_lags(design, spec, start=start)
    with design_threads(len(data)):
        warn_if_suspicious(design, spec, glm.dispersion)
        return result_from_fit(design, spec, glm), glm


def sweep(
    data: pd.DataFrame,
    option: str = "trend_df_per_year",
    values: Sequence[Any] = (4, 5, 6, 7, 8, 9, 10, 11, 12),
    per: float = 10.0,
    level: float = 0.95,
    show_progress: bool = False,
    on_error: OnError = "raise",
    **model_options: Any,
) -> pd.DataFrame:
    """Fit the model once per value of ``option``; return one row per value.

    Parameters
    ----------
    data : DataFrame
        Daily data, as for :func:`airhealth.fit`.
    option : str
        A :class:`~airhealth.model.spec.ModelSpec` option (default ``"trend_df_per_year"``).
    values : sequence
        The values to try (default 4 to 12 df per year); a non-empty list.
    per, level : float
        Exposure increase for the relative risks and the confidence level.
    show_progress : bool
        Report progress on stderr.
    on_error : {"raise", "keep"}
        A value that cannot be fitted: raise the single fit's error (default), or keep its row with missing
        numbers and the message in an ``error`` column (added only with ``"keep"``).
    **model_options
        ``outcome``, ``exposure`` and any other option (not ``option`` itself).

    Returns
    -------
    DataFrame
        A first column named after ``option`` with the value, then the columns of
        :func:`~airhealth.studies.compare.compare` (``lag, coef, se, rr, rr_low, rr_high, ..., qaic, n_days``),
        and ``error`` with ``on_error="keep"``.

    Examples
    --------
    >>> import airhealth
    >>> from airhealth.studies.sweep import sweep
    >>> table = sweep(airhealth.load_sample(), "trend_df_per_year", [4, 7, 10], outcome="deaths_all",
    ...               exposure="pm25", temperature="temperature")
    >>> list(table["trend_df_per_year"])
    [4, 7, 10]
    """
    for spec in _checked_specs(option, values, model_options):
        require_one_effect(spec.modifier, "sweep")
    columns = [option, *COMPARE_COLUMNS] + (["error"] if on_error == "keep" else [])
    rows = []
    for value, outcome in sweep_results(data, option, values, on_error, show_progress, **model_options):
        if isinstance(outcome, AirhealthError):
            rows.append({option: value, "error": str(outcome)})
            continue
        record = outcome.to_dict(per=per, level=level)
        rows.append({option: value, **{c: record[c] for c in COMPARE_COLUMNS}, "error": None})
    return pd.DataFrame(rows, columns=columns)
