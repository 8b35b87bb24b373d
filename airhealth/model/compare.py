"""Fit many lag structures on the same data through the shared-work path; one tidy row per structure.

All structures share the validated frame (validated once, for the deepest lag), the confounder block of
the design (built once) and the confounder-only fit (fitted once on the days where the outcome and every
confounder are available). Each structure is then fitted on its own usable days by
:func:`~airhealth.model.grid_inference.fit_exposure_only` (for the tidy table) or
:func:`~airhealth.model.grid_engine.fit_with_exposure` (for full results), which reuse that fit and give the
same estimates as a separate :func:`airhealth.fit` to rounding. The days each structure uses come from the
design builder's drop rules (:mod:`airhealth.model.design`), so they are those of the single fit.

Negative binomial models (theta is re-estimated for every structure) and exposure-response terms that
learn from the data (exposure-lag bases) use the plain path: one design and one :func:`fit_design` per structure.

The grid runs with one BLAS thread (:func:`~airhealth._threads.single_threaded_blas`): on the 2-core
machine it was measured on, a second BLAS thread did not speed up these products and made them several
times slower when the other core was busy (see docs/engine.md).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from .._progress import progress
from .._threads import single_threaded_blas
from ..errors import DataError, SpecificationError
from .design import (
    ConfounderBlock,
    Design,
    build_design,
    cached_confounders,
    leaves_columns_empty,
    model_frame,
    usable_days,
)
from .fitting import fit_design, result_from_fit
from .grid_engine import ConfounderFit, fit_confounders, fit_with_exposure
from .grid_inference import ExposureFit, fit_exposure_only
from .result import SUMMARY_COLUMNS, FitResult
from .spec import ModelSpec

__all__ = ["compare", "compare_results"]

COMPARE_COLUMNS = list(SUMMARY_COLUMNS)

#: Reason recorded for days left out only because ``common_days=True``.
NOT_COMMON = "not usable by every lag structure"


@dataclasses.dataclass(frozen=True)
class _Grid:
    """What every structure of one comparison shares."""

    specs: list[ModelSpec]
    frame: pd.DataFrame
    confounders: ConfounderBlock
    shared: bool  # whether the shared-work path applies


def _setup(data: pd.DataFrame, lags: Sequence[Any], model_options: dict[str, Any]) -> _Grid:
    if isinstance(lags, str) or not lags:
        raise SpecificationError("compare needs a list of lag structures, e.g. lags=['0', '1', '0-1', 'dl0-5'].")
    specs = [ModelSpec.from_options(lag=lag, **model_options) for lag in lags]
    deepest = max(specs, key=lambda s: s.lag.max_lag)
    frame = model_frame(data, deepest)
    confounders = cached_confounders(frame, specs[0])
    shared = specs[0].family != "negbin" and not any(hasattr(s.lag, "bind") for s in specs)
    return _Grid(specs, frame, confounders, shared)


def _column(frame: pd.DataFrame, name: str | None) -> np.ndarray | None:
    return None if name is None else frame[name].to_numpy(dtype=float, na_value=np.nan)


def _structure(grid: _Grid, spec: ModelSpec, raw, y, offset) -> tuple[np.ndarray, np.ndarray]:
    """Exposure columns (full calendar) and the usable-day mask, by the design builder's drop rules."""
    frame, conf = grid.frame, grid.confounders
    exposure = spec.lag.columns(raw)
    used = usable_days(y, exposure, conf, offset)
    if used.sum() <= conf.matrix.shape[1] + exposure.shape[1]:
        build_design(frame, spec, conf)  # raises the design builder's error naming the reasons
    return exposure, used


def _common(masks: list[np.ndarray], grid: _Grid) -> np.ndarray:
    common = np.logical_and.reduce(masks)
    p = grid.confounders.matrix.shape[1] + max(s.lag.n_columns for s in grid.specs)
    if common.sum() <= p:
        raise DataError(
            f"only {int(common.sum())} days are usable by every lag structure, too few for {p} parameters; "
            "use common_days=False or fewer / shorter lag structures."
        )
    return common


def _confounder_fit(grid: _Grid) -> tuple[ConfounderFit, np.ndarray]:
    """The confounder-only fit on the days with the outcome, every confounder (and the offset)."""
    spec, frame, conf = grid.specs[0], grid.frame, grid.confounders
    y = frame[spec.outcome].to_numpy(dtype=float, na_value=np.nan)
    rows = conf.complete & np.isfinite(y)
    offset = None
    if spec.offset is not None:
        offset = frame[spec.offset].to_numpy(dtype=float, na_value=np.nan)
        rows &= np.isfinite(offset)
        offset = offset[rows]
    base = fit_confounders(
        conf.matrix[rows], y[rows], family=spec.family, offset=offset, tol=spec.tol, max_iter=spec.max_iter,
        column_names=conf.column_names,
    )  # fmt: skip
    return base, rows


def _row(spec: ModelSpec, fit: ExposureFit, n_days: int, per: float, level: float) -> dict[str, Any]:
    """The tidy record of one structure, computed as :meth:`FitResult.to_dict` does."""
    from .effects import relative_risk  # as FitResult.effect does

    w = spec.lag.basis().sum(axis=0)
    e = relative_risk(float(w @ fit.coef), float(np.sqrt(w @ fit.cov @ w)), per=per, level=level)
    return {
        "outcome": spec.outcome, "exposure": spec.exposure, "lag": spec.lag.label, "per": e.per, "coef": e.coef,
        "se": e.se, "rr": e.rr, "rr_low": e.rr_low, "rr_high": e.rr_high, "percent_change": e.percent_change,
        "p_value": e.p_value, "dispersion": float(fit.dispersion), "qaic": float(fit.qaic), "n_days": n_days,
    }  # fmt: skip


def _restrict(design: Design, keep: np.ndarray) -> Design:
    """The design restricted to the calendar days ``keep`` (a subset of ``design.used``)."""
    inside = keep[design.used]
    newly = design.used & ~keep
    extra = pd.DataFrame({"date": design.calendar[newly], "reason": NOT_COMMON})
    dropped = pd.concat([design.dropped, extra], ignore_index=True).sort_values("date", kind="stable")
    return dataclasses.replace(
        design, matrix=design.matrix[inside], response=design.response[inside],
        offset=None if design.offset is None else design.offset[inside], used=keep,
        dropped=dropped.reset_index(drop=True),
    )  # fmt: skip


def compare_results(
    data: pd.DataFrame,
    lags: Sequence[Any],
    show_progress: bool = False,
    common_days: bool = False,
    **model_options: Any,
) -> list[FitResult]:
    """Fit every lag structure in ``lags`` with the same other options; return full results in order.

    Each result equals the corresponding :func:`airhealth.fit` (all coefficients, full covariance, fitted
    values); see :func:`compare` for the parameters. With ``common_days=True`` every structure is fitted
    on the days usable by all of them; the extra days left out are listed in ``dropped`` with the reason
    ``"not usable by every lag structure"``.
    """
    grid = _setup(data, lags, model_options)
    designs = [build_design(grid.frame, spec, grid.confounders) for spec in grid.specs]
    if common_days:
        keep = _common([d.used for d in designs], grid)
        designs = [_restrict(d, keep) for d in designs]
    pairs = list(zip(grid.specs, designs, strict=True))
    shown = progress(pairs, label="lag structures", enabled=show_progress)
    if not grid.shared or any(d.aliased for d in designs):  # aliased confounders: one design per structure
        return [result_from_fit(design, spec, fit_design(design, spec)) for spec, design in shown]
    with single_threaded_blas():
        base, rows = _confounder_fit(grid)
        results = []
        for spec, design in shown:
            names = design.column_names[design.exposure_slice]
            glm = fit_with_exposure(base, design.exposure_values[rows], design.used[rows], column_names=names)
            results.append(result_from_fit(design, spec, glm))
    return results


def compare(
    data: pd.DataFrame,
    lags: Sequence[Any],
    per: float = 10.0,
    level: float = 0.95,
    show_progress: bool = False,
    common_days: bool = False,
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
    common_days : bool
        Fit every structure on the days usable by all of them (the deepest lag loses the most days), so
        their QAIC values are computed on the same data and can be compared. Default False: each
        structure uses all of its own usable days, as a single fit would.
    **model_options
        ``outcome``, ``exposure`` and any other :class:`~airhealth.model.spec.ModelSpec` option.

    Returns
    -------
    DataFrame
        Columns ``outcome, exposure, lag, per, coef, se, rr, rr_low, rr_high, percent_change, p_value,
        dispersion, qaic, n_days``. Each row equals the corresponding single fit (to rounding); with
        ``common_days=True`` it equals the single fit restricted to the common days.

    Notes
    -----
    QAIC values of structures fitted on different days are not comparable; use ``common_days=True`` to
    choose between structures by QAIC (Peng, Dominici & Louis 2006).

    Examples
    --------
    >>> import airhealth
    >>> from airhealth.model.compare import compare
    >>> table = compare(airhealth.load_sample(), lags=["0", "1", "0-1"], outcome="deaths_all",
    ...                 exposure="pm25", temperature="temperature")
    >>> list(table["lag"])
    ['0', '1', '0-1']

    References
    ----------
    Peng RD, Dominici F, Louis TA (2006). Model choice in time series studies of air pollution and
    mortality. J R Stat Soc A 169:179–203.
    """
    grid = _setup(data, lags, model_options)
    if not grid.shared:
        results = compare_results(data, lags, show_progress=show_progress, common_days=common_days, **model_options)
        table = pd.DataFrame([r.to_dict(per=per, level=level) for r in results])
        return table[COMPARE_COLUMNS].reset_index(drop=True)
    first = grid.specs[0]  # outcome, exposure and offset are the same for every structure
    columns = (
        _column(grid.frame, first.exposure),
        _column(grid.frame, first.outcome),
        _column(grid.frame, first.offset),
    )
    structures = [_structure(grid, spec, *columns) for spec in grid.specs]
    if common_days:
        keep = _common([used for _, used in structures], grid)
        structures = [(exposure, keep) for exposure, _ in structures]
    if any(leaves_columns_empty(grid.confounders, used) for _, used in structures):  # a long gap: aliasing
        results = compare_results(data, lags, show_progress=show_progress, common_days=common_days, **model_options)
        return pd.DataFrame([r.to_dict(per=per, level=level) for r in results])[COMPARE_COLUMNS]
    rows_out = []
    with single_threaded_blas():
        base, rows = _confounder_fit(grid)
        items = list(zip(grid.specs, structures, strict=True))
        for spec, (exposure, used) in progress(items, label="lag structures", enabled=show_progress):
            fit = fit_exposure_only(base, exposure[rows], used[rows])
            rows_out.append(_row(spec, fit, int(used.sum()), per, level))
    return pd.DataFrame(rows_out, columns=COMPARE_COLUMNS)
