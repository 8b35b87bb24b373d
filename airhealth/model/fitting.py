"""Fit one model: data + spec → :class:`FitResult`, through the single internal fitting function.

Every fit in airhealth (single fits, comparisons, sweeps, the command line) is checked the same way: the data
by :func:`~airhealth.model.design.model_frame`, the design by :func:`~airhealth.model.design.build_design`
and the fit by :func:`warn_if_suspicious`; every full fit goes through :func:`fit_design`, so a faster engine
can replace the engine behind it in one place.
"""

from __future__ import annotations

import dataclasses
import functools
from typing import Any

import numpy as np
import pandas as pd

from .._threads import design_threads, fitting_blas_threads
from .._warn import warn_user
from ..errors import DataError, DataWarning, DispersionWarning
from .design import EXPOSURE_MISSING, EXPOSURE_REASONS, Design, build_design, lag_window_remedy, model_frame
from .engine.irls import GLMFit, fit_glm
from .engine.variance import family_of, fit_hac_covariance
from .result import FitResult
from .spec import ModelSpec

__all__ = ["fit", "fit_design", "fit_spec", "fit_with_residual_lags", "result_from_fit", "warn_if_suspicious"]

#: Reason recorded for days left out because a lagged deviance residual (``residual_lags``) is missing.
RESIDUAL_LAG_MISSING = "lagged residual missing"

DISPERSION_WARN = 5.0
FEW_EVENTS_PER_DAY = 1.0
MISSING_EXPOSURE_WARN = 0.25


def fit_design(design: Design, spec: ModelSpec, start: np.ndarray | None = None) -> GLMFit:
    """The one internal fitting function: fit the design's GLM with the spec's family and tolerance."""
    return fit_glm(
        design.matrix,
        design.response,
        family=spec.family,
        offset=design.offset,
        start=start,
        theta_method=spec.theta_method,
        tol=spec.tol,
        max_iter=spec.max_iter,
        column_names=list(design.column_names),
        response_name=spec.outcome,
        strata=None if design.strata is None else design.strata.codes,
    )


def fit_with_residual_lags(design: Design, spec: ModelSpec, start: np.ndarray | None = None) -> tuple[Design, GLMFit]:
    r"""Fit ``design``; with ``spec.residual_lags = k > 0``, add lagged deviance residuals and fit again.

    The transitional model of Brumback et al. (2000): the model is fitted, its deviance residuals
    :math:`r_t` are placed on the calendar (missing on days not used), and the second fit adds
    :math:`r_{t-1}, \dots, r_{t-k}` as covariates, entered after the confounders and before the exposure.
    Days whose lagged residual is missing (the first ``k`` days used and the ``k`` days after each gap) are
    left out with the reason ``"lagged residual missing"``. Returns the design fitted and the fit.

    References
    ----------
    Brumback BA, Ryan LM, Schwartz JD, Neas LM, Gold DR (2000). Transitional regression models,
    with application to environmental time series. J Am Stat Assoc 95:16–27.
    """
    glm = fit_design(design, spec, start=start)
    if spec.residual_lags == 0:
        return design, glm
    augmented = _with_residual_lags(design, spec, glm)
    return augmented, fit_design(augmented, spec)


def _with_residual_lags(design: Design, spec: ModelSpec, glm: GLMFit) -> Design:
    """``design`` with the lagged deviance residuals of ``glm`` as columns, on the days where all exist."""
    k = spec.residual_lags
    family = family_of(glm.family, glm.theta)
    y, mu = design.response, glm.fitted
    on_calendar = np.full(len(design.calendar), np.nan)
    on_calendar[design.used] = np.sign(y - mu) * np.sqrt(np.maximum(family.unit_deviance(y, mu), 0.0))
    lagged = np.full((on_calendar.size, k), np.nan)
    for j in range(1, k + 1):
        lagged[j:, j - 1] = on_calendar[:-j]
    keep_used = np.isfinite(lagged[design.used]).all(axis=1)  # among the rows of design.matrix
    used = design.used.copy()
    used[design.used] = keep_used
    lost = design.calendar[design.used & ~used]
    dropped = pd.concat(
        [design.dropped, pd.DataFrame({"date": lost, "reason": RESIDUAL_LAG_MISSING})], ignore_index=True
    ).sort_values("date", kind="stable", ignore_index=True)
    n_conf = design.exposure_slice.start
    names = [f"deviance residual lag {j}" for j in range(1, k + 1)]
    matrix = np.asfortranarray(
        np.hstack([design.matrix[keep_used, :n_conf], lagged[used], design.matrix[keep_used, n_conf:]])
    )
    if matrix.shape[0] <= matrix.shape[1]:
        raise DataError(
            f"too few usable days ({matrix.shape[0]}) for a model with {matrix.shape[1]} parameters after "
            f"residual_lags={k} left out {lost.size} more days (the first {k} days used and after each gap); "
            "use fewer residual lags or a longer series."
        )
    at = "lag 1" if k == 1 else f"lags 1-{k}"
    note = (
        f"deviance residuals of a first fit at {at} entered as covariates (Brumback et al. 2000); "
        f"{lost.size} days without a lagged residual left out"
    )
    return dataclasses.replace(
        design,
        matrix=matrix,
        response=design.response[keep_used],
        offset=None if design.offset is None else design.offset[keep_used],
        column_names=(*design.column_names[:n_conf], *names, *design.column_names[n_conf:]),
        exposure_slice=slice(n_conf + k, matrix.shape[1]),
        used=used,
        dropped=dropped,
        notes=(*design.notes, note),
    )


def warn_if_suspicious(design: Design, spec: ModelSpec, dispersion: float) -> None:
    """Warn about what a fit on ``design`` rests on: few events, many days lost to the lag window, high dispersion.

    The one set of fit-level warnings: :func:`fit`, ``compare``, ``compare_results`` and ``sweep`` call it
    for every model they fit, with the model's estimated ``dispersion``.
    """
    mean_count = float(np.mean(design.response))
    if mean_count < FEW_EVENTS_PER_DAY:
        warn_user(
            f"few events: {spec.outcome!r} averages {mean_count:.2f} per day over the days used; "
            "estimates rest on few cases and large-sample intervals may be poor.",
            DataWarning,
        )
    reasons = design.dropped["reason"].to_numpy(dtype=object)  # (numpy: a tenth of a ms less than Series.isin)
    n_lost = int(np.isin(reasons, EXPOSURE_REASONS).sum())
    n_days = len(design.calendar)
    if n_lost > MISSING_EXPOSURE_WARN * n_days:
        n_missing = int((reasons == EXPOSURE_MISSING).sum())
        warn_user(
            f"exposure {spec.exposure!r} (lag {spec.lag.label}) leaves {n_lost} of {n_days} days unusable "
            f"({n_missing} days with no value, the rest with a missing day in the lag window); the fit uses "
            f"{int(design.used.sum())} days. {lag_window_remedy(spec.lag)}",
            DataWarning,
        )
    if spec.family == "quasipoisson" and dispersion > DISPERSION_WARN:
        warn_user(
            f"the estimated dispersion is {dispersion:.1f} (Pearson χ² / residual df); counts vary far "
            "more than Poisson — check for outliers, missing confounders or a mis-specified outcome.",
            DispersionWarning,
        )


def _exposure_quartiles(design: Design) -> tuple[float, float]:
    """Quartiles of the daily exposure on the days used, or on every day with a value when none of the days
    used has a same-day value (e.g. monitoring every third day fitted at lag 1)."""
    exposure = design.exposure_raw[design.used]
    exposure = exposure[np.isfinite(exposure)]
    if exposure.size == 0:
        exposure = design.exposure_raw[np.isfinite(design.exposure_raw)]
    q1, q3 = np.percentile(exposure, [25, 75])
    return float(q1), float(q3)


@functools.lru_cache(maxsize=64)
def _names_index(names: tuple[str, ...]) -> pd.Index:
    """The index of coefficient names (immutable, so results may share it; ~0.2-0.3 ms to build afresh)."""
    return pd.Index(names)


def result_from_fit(design: Design, spec: ModelSpec, glm: GLMFit) -> FitResult:
    """Package an engine fit and its design into a :class:`FitResult`.

    The result's spec describes what was fitted: a negative binomial that fell back to its Poisson limit
    has ``family="poisson"`` and says why in ``notes`` (with any design notes, e.g. aliased columns).
    """
    if design.lag is not None:  # keep the lag structure as fitted (e.g. an exposure-lag basis with its knots)
        spec = spec.replace(lag=design.lag)
    if glm.family != spec.family:
        spec = spec.replace(family=glm.family)
    names = list(design.column_names)
    index = _names_index(design.column_names)  # one immutable index for coef and cov (an Index never changes)
    dates = design.calendar[design.used]
    q1, q3 = _exposure_quartiles(design)
    cov, hac_lags = glm.cov, None
    if spec.interval == "hac":
        family = family_of(glm.family, glm.theta)
        cov, hac_lags = fit_hac_covariance(
            design.matrix, design.response, glm.fitted, family, glm.cov_unscaled, dates.to_numpy(), spec.hac_lags
        )
    # every pandas object below is made here for the result alone (numpy copies of the engine's arrays),
    # so the result adopts them without the deep copies FitResult(...) makes of what a caller passes
    return FitResult._adopt(
        spec=spec,
        coef=pd.Series(np.array(glm.coef, dtype=float), index=index, name="coef"),
        cov=pd.DataFrame(np.array(cov, dtype=float), index=index, columns=index),
        dispersion=float(glm.dispersion),
        deviance=float(glm.deviance),
        loglik=float(glm.loglik),
        qaic=float(glm.qaic),
        df_resid=int(glm.df_resid),
        n_days=int(design.used.sum()),
        dropped=design.dropped.copy(deep=True),
        fitted=pd.Series(np.array(glm.fitted, dtype=float), index=dates, name="fitted"),
        observed=pd.Series(np.array(design.response, dtype=float), index=dates, name=spec.outcome),
        exposure_columns=tuple(names[design.exposure_slice]),
        exposure_iqr=float(q3 - q1),
        converged=bool(glm.converged),
        n_iter=int(glm.n_iter),
        theta=None if glm.theta is None else float(glm.theta),
        bases={b.name: b.basis for b in design.confounders.blocks if b.basis is not None},
        aliased=design.aliased,
        notes=design.notes + glm.notes,
        design_matrix=design.matrix,
        hac_lags=hac_lags,
        copollutant_correlations=design.copollutant_correlations,
        groups=design.groups,
        group_codes=design.group_codes[design.used] if design.groups else None,
        strata=None if design.strata is None else _strata_counts(design.strata),
    )


def _strata_counts(strata: Any) -> dict[str, int]:
    """The counts of a case-crossover's strata, as :meth:`FitResult.to_dict` reports them."""
    return {
        "n_strata": strata.n_strata,
        "n_strata_without_events": strata.n_strata_without_events,
        "n_strata_single_day": strata.n_strata_single_day,
    }


def fitted_result(design: Design, spec: ModelSpec, start: np.ndarray | None = None) -> tuple[FitResult, GLMFit]:
    """Fit a built design (with lagged residual terms when the spec asks), warn as a single fit does, and
    return the result and the engine's fit: the one sequence every full fit of a design goes through."""
    design, glm = fit_with_residual_lags(design, spec, start=start)
    warn_if_suspicious(design, spec, glm.dispersion)
    return result_from_fit(design, spec, glm), glm


def fit_spec(data: pd.DataFrame, spec: ModelSpec) -> FitResult:
    """Validate ``data``, build the design for ``spec``, fit it and return the result."""
    with design_threads(len(data)):  # BLAS threads by the policy also around the fit (small products)
        frame = model_frame(data, spec)
        design = build_design(frame, spec)
        if fitting_blas_threads(*design.matrix.shape) == 1:  # the fit's own policy picks the same one thread:
            return fitted_result(design, spec)[0]  # stay inside (a BLAS thread switch costs ~0.1 ms)
    design, glm = fit_with_residual_lags(design, spec)
    with design_threads(len(data)):
        warn_if_suspicious(design, spec, glm.dispersion)
        return result_from_fit(design, spec, glm)


def fit(
    data: pd.DataFrame,
    outcome: str,
    exposure: str,
    lag: Any = "0-1",
    temperature: str | None = None,
    trend_df_per_year: float = 7.0,
    **options: Any,
) -> FitResult:
    """Fit the time-series model of daily counts for one city and one exposure.

    Parameters
    ----------
    data : DataFrame
        One row per day with a date column (``date`` by default), the outcome counts, the exposure and
        any confounders (see :func:`airhealth.prep.align_daily` to build it from separate tables).
    outcome : str
        Column of daily counts (deaths, admissions).
    exposure : str
        Column of the daily pollutant level.
    lag : str or LagStructure
        ``"0"``, ``"1"``, ``"0-1"`` (default), ``"0-3"``, ``"dl0-5"``, ``"dl0-7:poly3"``, ``"dl0-21:spline4"``.
    temperature : str or None
        Daily mean temperature column (splines of the same day and of the mean of lags 1–3).
    trend_df_per_year : float
        df per year of the time spline (default 7).
    **options
        Any other field of :class:`~airhealth.model.spec.ModelSpec` (``humidity``, ``holidays``,
        ``confounders``, ``family``, ``seasonality``, ``date``, ...).

    Returns
    -------
    FitResult
        With ``effect(per=10)`` for the relative risk per 10 units, ``to_dict()``, plots and tables.

    Examples
    --------
    >>> import airhealth
    >>> data = airhealth.load_sample()
    >>> result = airhealth.fit(data, outcome="deaths_all", exposure="pm25", lag="0-1",
    ...                        temperature="temperature")
    >>> result.effect(per=10).rr > 1  # doctest: +SKIP
    True

    References
    ----------
    Bhaskaran K, Gasparrini A, Hajat S, Smeeth L, Armstrong B (2013). Time series regression studies in
    environmental epidemiology. Int J Epidemiol 42:1187–1195.
    """
    spec = ModelSpec.from_options(
        outcome=outcome,
        exposure=exposure,
        lag=lag,
        temperature=temperature,
        trend_df_per_year=trend_df_per_year,
        **options,
    )
    return fit_spec(data, spec)
