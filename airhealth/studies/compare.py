"""Fit many lag structures on the same data; one tidy row (or one full result) per structure.

Every structure is checked exactly as :func:`airhealth.fit` checks it, by the same functions: the data once by
:func:`~airhealth.model.design.model_frame` (for the deepest lag), each structure's design by
:func:`~airhealth.model.design.build_design` (days dropped and why, too few days, unsupported columns and any
guard added there), each fit by :func:`~airhealth.model.fitting.warn_if_suspicious` (few events, days lost to
the lag window, dispersion). So a comparison gives the warnings and errors the single fits give.

What the structures share: the validated frame and the confounder block (built once). :func:`compare_results`
(full results) fits each design by :func:`~airhealth.model.fitting.fit_design`, as a single fit does.
:func:`compare` (the tidy table) fits the confounder-only model once (on the days where the outcome and every
confounder are available) and each structure by
:func:`~airhealth.model.engine.grid_inference.fit_exposure_only`, which reuses it and gives the single fit's
estimates to rounding; whatever that shared work cannot do (a structure that does not converge, collinear
columns, aliased columns, negative binomial models that re-estimate theta, exposure-response terms that learn
from the data, Newey–West intervals, lagged residual terms) is fitted by
:func:`~airhealth.model.fitting.fit_design` on the structure's own design.

BLAS threads follow the fitting path's policy (:func:`airhealth._threads.fitting_threads`).
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from .._progress import progress
from .._threads import design_threads, fitting_threads
from ..errors import DataError, FitError, SpecificationError
from ..model.design import ConfounderBlock, Design, build_design, cached_confounders, model_frame
from ..model.engine.grid import ConfounderFit, fit_confounders
from ..model.engine.grid_inference import ExposureFit, exposure_block, fit_exposure_only
from ..model.engine.irls import GLMFit
from ..model.fitting import fit_design, fit_with_residual_lags, result_from_fit, warn_if_suspicious
from ..model.result import SUMMARY_COLUMNS, FitResult
from ..model.spec import ModelSpec

__all__ = ["compare", "compare_results"]

COMPARE_COLUMNS = list(SUMMARY_COLUMNS)

#: Reason recorded for days left out only because ``common_days=True``.
NOT_COMMON = "not usable by every lag structure"


@dataclasses.dataclass(frozen=True)
class _Grid:
    """What every structure of one comparison shares, and each structure's checked design."""

    specs: list[ModelSpec]
    frame: pd.DataFrame
    confounders: ConfounderBlock
    designs: list[Design]
    shared: bool  # whether the shared-work path applies

    def threads(self):
        """The BLAS thread policy for the widest design of the comparison."""
        return fitting_threads(len(self.frame), max(d.matrix.shape[1] for d in self.designs))


def _setup(data: pd.DataFrame, lags: Sequence[Any], model_options: dict[str, Any], common_days: bool) -> _Grid:
    """Validate once, build (and so check) every structure's design as a single fit would."""
    if isinstance(lags, str) or not lags:
        raise SpecificationError("compare needs a list of lag structures, e.g. lags=['0', '1', '0-1', 'dl0-5'].")
    specs = [ModelSpec.from_options(lag=lag, **model_options) for lag in lags]
    deepest = max(specs, key=lambda s: s.lag.max_lag)
    with design_threads(len(data)):
        frame = model_frame(data, deepest)
        confounders = cached_confounders(frame, specs[0])
        designs = [build_design(frame, spec, confounders) for spec in specs]
    if common_days:
        keep = _common([d.used for d in designs], designs)
        designs = [_restrict(d, keep) for d in designs]
    shared = specs[0].family != "negbin" and not any(hasattr(s.lag, "bind") for s in specs)
    shared = shared and specs[0].interval == "quasi-poisson"  # HAC intervals: each structure's single fit
    shared = shared and specs[0].residual_lags == 0  # lagged residual terms: each structure's single fit
    return _Grid(specs, frame, confounders, designs, shared)


def _common(masks: list[np.ndarray], designs: list[Design]) -> np.ndarray:
    common = np.logical_and.reduce(masks)
    p = max(d.matrix.shape[1] for d in designs)
    if common.sum() <= p:
        raise DataError(
            f"only {int(common.sum())} days are usable by every lag structure, too few for {p} parameters; "
            "use common_days=False or fewer / shorter lag structures."
        )
    return common


def _confounder_fit(grid: _Grid) -> tuple[ConfounderFit, np.ndarray] | None:
    """The confounder-only fit on the days with the outcome, every confounder (and the offset).

    ``None`` when it cannot be fitted cleanly (collinear or unsupported confounder columns on these days,
    no convergence): every structure then takes its single fit, with the single fit's errors and warnings.
    """
    spec, frame, conf = grid.specs[0], grid.frame, grid.confounders
    y = frame[spec.outcome].to_numpy(dtype=float, na_value=np.nan)
    rows = conf.complete & np.isfinite(y)
    offset = None
    if spec.offset is not None:
        offset = frame[spec.offset].to_numpy(dtype=float, na_value=np.nan)
        rows &= np.isfinite(offset)
        offset = offset[rows]
    try:
        with warnings.catch_warnings(record=True):  # this fit is internal: its warnings are not the user's
            warnings.simplefilter("always")
            base = fit_confounders(
                conf.matrix[rows], y[rows], family=spec.family, offset=offset, tol=spec.tol,
                max_iter=spec.max_iter, column_names=conf.column_names,
            )  # fmt: skip
    except FitError:
        return None
    return (base, rows) if base.fit.converged else None


def _exposure_fit(grid: _Grid, shared, spec: ModelSpec, design: Design) -> ExposureFit:
    """The exposure block of one structure: the shared work when it applies, else the single fit's."""
    k = design.matrix.shape[1] - design.n_confounder_columns

    def single() -> GLMFit:
        return fit_design(design, spec)

    same_columns = design.column_names[: design.n_confounder_columns] == grid.confounders.column_names
    if shared is None or not same_columns:  # e.g. columns aliased for this structure's days
        return exposure_block(single(), k)
    base, rows = shared
    names = design.column_names[design.exposure_slice]
    return fit_exposure_only(base, design.exposure_values[rows], design.used[rows], column_names=names, fallback=single)


def _row(spec: ModelSpec, fit: ExposureFit, n_days: int, per: float, level: float) -> dict[str, Any]:
    """The tidy record of one structure, computed as :meth:`FitResult.to_dict` does."""
    from ..model.effects import relative_risk  # as FitResult.effect does

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
    values), with the same warnings and errors; see :func:`compare` for the parameters. With
    ``common_days=True`` every structure is fitted on the days usable by all of them; the extra days left
    out are listed in ``dropped`` with the reason ``"not usable by every lag structure"``.
    """
    return _full_results(_setup(data, lags, model_options, common_days), show_progress)


def _full_results(grid: _Grid, show_progress: bool) -> list[FitResult]:
    """Each structure's single fit, as :func:`airhealth.fit` does it (same checks, same warnings)."""
    pairs = list(zip(grid.specs, grid.designs, strict=True))
    results = []
    with grid.threads():
        for spec, design in progress(pairs, label="lag structures", enabled=show_progress):
            fitted, glm = fit_with_residual_lags(design, spec)
            warn_if_suspicious(fitted, spec, glm.dispersion)
            results.append(result_from_fit(fitted, spec, glm))
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

    Raises
    ------
    DataError, SpecificationError, FitError
        What :func:`airhealth.fit` raises for the first structure that cannot be fitted (the same check
        functions run for every structure); a DataError when ``common_days=True`` leaves too few days.

    Warns
    -----
    DataWarning, DispersionWarning, ConvergenceWarning
        What :func:`airhealth.fit` gives for each structure on the same data.

    Notes
    -----
    QAIC values of structures fitted on different days are not comparable; use ``common_days=True`` to
    choose between structures by QAIC (Peng, Dominici & Louis 2006).

    Examples
    --------
    >>> import airhealth
    >>> from airhealth.studies.compare import compare
    >>> table = compare(airhealth.load_sample(), lags=["0", "1", "0-1"], outcome="deaths_all",
    ...                 exposure="pm25", temperature="temperature")
    >>> list(table["lag"])
    ['0', '1', '0-1']

    References
    ----------
    Peng RD, Dominici F, Louis TA (2006). Model choice in time series studies of air pollution and
    mortality. J R Stat Soc A 169:179–203.
    """
    grid = _setup(data, lags, model_options, common_days)
    if not grid.shared:
        table = pd.DataFrame([r.to_dict(per=per, level=level) for r in _full_results(grid, show_progress)])
        return table[COMPARE_COLUMNS].reset_index(drop=True)
    rows_out = []
    with grid.threads():
        shared = _confounder_fit(grid)
        pairs = list(zip(grid.specs, grid.designs, strict=True))
        for spec, design in progress(pairs, label="lag structures", enabled=show_progress):
            fit = _exposure_fit(grid, shared, spec, design)
            warn_if_suspicious(design, spec, fit.dispersion)
            rows_out.append(_row(spec, fit, int(design.used.sum()), per, level))
    return pd.DataFrame(rows_out, columns=COMPARE_COLUMNS)
