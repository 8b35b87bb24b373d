"""Sensitivity sweeps: refit one model over several values of one option; one tidy row per value.

A sweep over an option of the confounder model (``trend_df_per_year``, ``temperature_df``, ...) changes
the confounder block, so the shared-work path of :mod:`airhealth.studies.compare` does not apply. What is
shared here: the validated daily frame (validated once per distinct set of columns and lag depth) and
warm starts: when a value gives the same design columns as the previous one (e.g. a sweep over ``tol``)
the fit starts from the previous coefficients. The converged estimates do not depend on the start, so
every row equals the corresponding single :func:`airhealth.fit`. Every value is checked as a single fit is
(``model_frame``, ``build_design``, ``warn_if_suspicious``), so a sweep gives the single fits' warnings and
errors. BLAS threads follow the fitting path's policy (:func:`airhealth._threads.fitting_threads`).

References
----------
Peng RD, Dominici F, Louis TA (2006). Model choice in time series studies of air pollution and
mortality. J R Stat Soc A 169:179–203 (sensitivity of the estimates to the df of the time spline).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

import pandas as pd

from .._progress import progress
from .._threads import design_threads, fitting_threads
from ..errors import SpecificationError
from ..model.design import build_design, model_frame
from ..model.fitting import fit_design, result_from_fit, warn_if_suspicious
from ..model.spec import ModelSpec
from ._rows import pick
from .compare import COMPARE_COLUMNS

__all__ = ["sweep"]


def sweep(
    data: pd.DataFrame,
    option: str = "trend_df_per_year",
    values: Sequence[Any] = (4, 5, 6, 7, 8, 9, 10, 11, 12),
    per: float = 10.0,
    level: float = 0.95,
    show_progress: bool = False,
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
        The values to try (default 4 to 12 df per year).
    per, level : float
        Exposure increase for the relative risks and the confidence level.
    show_progress : bool
        Report progress on stderr.
    **model_options
        ``outcome``, ``exposure`` and any other option (not ``option`` itself).

    Returns
    -------
    DataFrame
        A first column named after ``option`` with the value, then the columns of
        :func:`~airhealth.studies.compare.compare` (``lag, coef, se, rr, rr_low, rr_high, ..., qaic, n_days``).

    Examples
    --------
    >>> import airhealth
    >>> from airhealth.studies.sweep import sweep
    >>> table = sweep(airhealth.load_sample(), "trend_df_per_year", [4, 7, 10], outcome="deaths_all",
    ...               exposure="pm25", temperature="temperature")
    >>> list(table["trend_df_per_year"])
    [4, 7, 10]
    """
    valid = {f.name for f in dataclasses.fields(ModelSpec)}
    if option not in valid:
        raise SpecificationError(f"unknown model option {option!r}; valid options are: {', '.join(sorted(valid))}.")
    if option in model_options:
        raise SpecificationError(f"{option!r} is swept over values=[...]; do not also pass it as an option.")
    if isinstance(values, str) or len(values) == 0:
        raise SpecificationError(f"values must be a non-empty list of values for {option!r}.")
    specs = [ModelSpec.from_options(**{option: value}, **model_options) for value in values]
    frames: dict[tuple, pd.DataFrame] = {}
    rows, previous = [], None
    for value, spec in progress(list(zip(values, specs, strict=True)), label=option, enabled=show_progress):
        key = (spec.columns_used(), spec.lag.max_lag)
        with design_threads(len(data)):
            if key not in frames:
                frames[key] = model_frame(data, spec)
            design = build_design(frames[key], spec)
        start = previous.coef if previous is not None and previous.column_names == design.column_names else None
        with fitting_threads(*design.matrix.shape):
            glm = fit_design(design, spec, start=start)
        previous = glm
        with design_threads(len(data)):
            warn_if_suspicious(design, spec, glm.dispersion)
            record = result_from_fit(design, spec, glm).to_dict(per=per, level=level)
        rows.append({option: value, **pick(record, COMPARE_COLUMNS)})
    return pd.DataFrame(rows, columns=[option, *COMPARE_COLUMNS])
