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

A comparison may also cross the lag structures with several df per year of the time spline (one row per
combination; each df value has its own confounder block and confounder-only fit). By default every model
is fitted on the days usable by all of them (``common_days=True``), so that their QAIC values rest on the
same data; QAIC is reported with each model's own dispersion and with one common dispersion
(:mod:`airhealth.studies.qaic`).

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
from .._warn import warn_user
from ..errors import DataError, DataWarning, FitError, SpecificationError
from ..model.design import ConfounderBlock, Design, build_design, cached_confounders, model_frame
from ..model.engine.grid import ConfounderFit, fit_confounders
from ..model.engine.grid_inference import ExposureFit, exposure_block, fit_exposure_only
from ..model.engine.irls import GLMFit
from ..model.fitting import fit_design, fitted_result, warn_if_suspicious
from ..model.group_effects import require_one_effect
from ..model.result import SUMMARY_COLUMNS, FitResult
from ..model.spec import Interval, ModelSpec
from ._rows import outcome_only_on, restrict_to_days
from .qaic import add_common_qaic

__all__ = ["compare", "compare_results"]

#: Columns of one-model tables shared with :func:`airhealth.studies.sweep.sweep`.
COMPARE_COLUMNS = list(SUMMARY_COLUMNS)

#: Columns of the :func:`compare` table (``hac_lags`` is added after ``interval`` for Newey–West intervals).
TABLE_COLUMNS = [
    "outcome", "exposure", "lag", "trend_df_per_year", "per", "unit", "coef", "se", "rr", "rr_low", "rr_high",
    "percent_change", "p_value", "dispersion", "n_params", "qaic", "qaic_common", "delta_qaic_common",
    "common_dispersion", "qaic_common_from", "n_days", "days", "first_day", "last_day", "interval",
]  # fmt: skip

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
    #: With common days on the shared path: the unrestricted designs, from which a structure's restricted
    #: design (matrix included) is made only if its single fit is needed (``designs`` then hold the
    #: restricted days and response but the unrestricted matrix and reasons, which the shared path never
    #: fits with; see :func:`_restrict`).
    originals: list[Design] | None = None
    keep: np.ndarray | None = None

    def threads(self):
        """The BLAS thread policy for the widest design of the comparison."""
        return fitting_threads(len(self.frame), max(d.matrix.shape[1] for d in self.designs))

    def fitting_design(self, i: int) -> Design:
        """Structure ``i``'s design as its single fit uses it (restricted, matrix included)."""
        if self.originals is None:
            return self.designs[i]
        return _restrict(self.originals[i], self.keep)


def _check_lags(lags: Sequence[Any], model_options: dict[str, Any]) -> None:
    if "lag" in model_options:
        raise SpecificationError(
            f"compare takes its lag structures as lags=[...], not lag={model_options['lag']!r}: e.g. "
            "lags=['0', '0-1', 'dl0-5']."
        )
    if isinstance(lags, str) or not lags:
        raise SpecificationError("compare needs a list of lag structures, e.g. lags=['0', '1', '0-1', 'dl0-5'].")


def _setup(data: pd.DataFrame, lags: Sequence[Any], model_options: dict[str, Any], common_days: bool) -> _Grid:
    """Validate once, build (and so check) every structure's design as a single fit would."""
    _check_lags(lags, model_options)
    specs = [ModelSpec.from_options(lag=lag, **model_options) for lag in lags]
    require_one_effect(specs[0].modifier, "compare")
    frame = _frame(data, specs)
    grid = _grid(frame, specs)
    if common_days:
        grid = _on_days(grid, _common([d.used for d in grid.designs], grid.designs))
    return grid


def _on_days(grid: _Grid, keep: np.ndarray) -> _Grid:
    """The grid on the days ``keep`` only (a case-crossover is rebuilt: the days used decide its strata)."""
    if grid.specs[0].design == "case-crossover":
        return _grid(outcome_only_on(grid.frame, grid.specs[0].outcome, keep), grid.specs)
    return _restricted(grid, keep)


def _frame(data: pd.DataFrame, specs: Sequence[ModelSpec]) -> pd.DataFrame:
    """The validated frame, once, for the deepest lag (every spec reads the same columns)."""
    deepest = max(specs, key=lambda s: s.lag.max_lag)
    with design_threads(len(data)):
        return model_frame(data, deepest)


def _grid(frame: pd.DataFrame, specs: list[ModelSpec]) -> _Grid:
    """Every structure's design on one confounder block (the specs differ only in their lag)."""
    with design_threads(len(frame)):
        confounders = cached_confounders(frame, specs[0])
        designs = [build_design(frame, spec, confounders) for spec in specs]
    shared = specs[0].family != "negbin" and not any(hasattr(s.lag, "bind") for s in specs)
    shared = shared and specs[0].interval == "quasi-poisson"  # HAC intervals: each structure's single fit
    shared = shared and specs[0].design == "time-series"  # a case-crossover: each structure's single fit
    shared = shared and specs[0].residual_lags == 0  # lagged residual terms: each structure's single fit
    return _Grid(specs, frame, confounders, designs, shared)


def _restricted(grid: _Grid, keep: np.ndarray) -> _Grid:
    """The grid with every design restricted to the days ``keep``."""
    for spec, design in zip(grid.specs, grid.designs, strict=True):
        if not design.used[keep].all():  # the days usable by a model do not depend on the time-spline df
            raise FitError(
                f"lag {spec.lag.label} with trend_df_per_year={spec.trend_df_per_year:g} cannot use all of the "
                "common days; use common_days=False."
            )
    if not grid.shared:
        return dataclasses.replace(grid, designs=[_restrict(d, keep) for d in grid.designs])
    light = [_restrict(d, keep, matrix=False) for d in grid.designs]
    return dataclasses.replace(grid, designs=light, originals=grid.designs, keep=keep)


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


def _exposure_fit(grid: _Grid, shared, i: int) -> ExposureFit:
    """The exposure block of structure ``i``: the shared work when it applies, else the single fit's."""
    spec, design = grid.specs[i], grid.designs[i]
    k = design.matrix.shape[1] - design.n_confounder_columns

    def single() -> GLMFit:
        return fit_design(grid.fitting_design(i), spec)

    same_columns = design.column_names[: design.n_confounder_columns] == grid.confounders.column_names
    if shared is None or not same_columns:  # e.g. columns aliased for this structure's days
        return exposure_block(single(), k)
    base, rows = shared
    names = design.column_names[design.exposure_slice]
    return fit_exposure_only(base, design.exposure_values[rows], design.used[rows], column_names=names, fallback=single)


def _row(spec: ModelSpec, fit: ExposureFit, design: Design, per: float, level: float) -> dict[str, Any]:
    """The tidy record of one structure, computed as :meth:`FitResult.to_dict` does."""
    from ..model.effects import relative_risk  # as FitResult.effect does

    w = spec.lag.basis().sum(axis=0)
    e = relative_risk(float(w @ fit.coef), float(np.sqrt(w @ fit.cov @ w)), per=per, level=level)
    return {
        "outcome": spec.outcome, "exposure": spec.exposure, "lag": spec.lag.label, "per": e.per,
        "unit": spec.unit, "coef": e.coef, "se": e.se, "rr": e.rr, "rr_low": e.rr_low, "rr_high": e.rr_high,
        "percent_change": e.percent_change, "p_value": e.p_value, "dispersion": float(fit.dispersion),
        "n_params": int(fit.n_params), "loglik": float(fit.loglik), "qaic": float(fit.qaic),
        "n_days": int(design.used.sum()), "interval": spec.interval_used,
    }  # fmt: skip


def _result_row(result: FitResult, per: float, level: float) -> dict[str, Any]:
    """The tidy record of one full result (the single fit's own record)."""
    record = result.to_dict(per=per, level=level)
    row = {k: record[k] for k in (*COMPARE_COLUMNS, "unit", "interval") if k != "lag"}
    row.update(lag=record["lag"], n_params=len(result.coef), loglik=float(result.loglik))
    if result.hac_lags is not None:
        row["hac_lags"] = int(result.hac_lags)
    return row


def _restrict(design: Design, keep: np.ndarray, matrix: bool = True) -> Design:
    """The design on the common days ``keep`` (see :func:`~airhealth.studies._rows.restrict_to_days`)."""
    return restrict_to_days(design, keep, NOT_COMMON, matrix=matrix)


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
    results = []
    with grid.threads():
        for i in progress(range(len(grid.specs)), label="lag structures", enabled=show_progress):
            spec, design = grid.specs[i], grid.fitting_design(i)
            results.append(fitted_result(design, spec)[0])
    return results


def compare(
    data: pd.DataFrame,
    lags: Sequence[Any],
    trend_df_per_year: float | Sequence[float] = 7.0,
    per: float = 10.0,
    level: float = 0.95,
    show_progress: bool = False,
    common_days: bool = True,
    interval: Interval = "quasi-poisson",
    **model_options: Any,
) -> pd.DataFrame:
    """Compare lag structures (and df per year of the time trend) for one outcome and exposure.

    Every lag structure is fitted with every value of ``trend_df_per_year``: one row per model, in the
    order of ``lags``, then of the df values.

    Parameters
    ----------
    data : DataFrame
        Daily data, as for :func:`airhealth.fit`.
    lags : sequence
        Lag structures (strings such as ``"0"``, ``"0-1"``, ``"dl0-5"`` or objects).
    trend_df_per_year : float or sequence of float
        df per year of the time spline: one value (default 7) or several, e.g. ``[4, 6, 8, 10, 12]``.
    per : float
        Exposure increase for the relative risks (default 10).
    level : float
        Confidence level of the intervals.
    show_progress : bool
        Report progress on stderr.
    common_days : bool
        Fit every model on the days usable by all of them (default True; the deepest lag loses the most
        days), so that their QAIC values rest on the same data and can be compared. ``False``: each model
        uses all of its own usable days, as a single fit would (a warning then says that QAIC values
        compared on different days are not comparable).
    interval : {"quasi-poisson", "hac"}
        Standard errors and intervals, as for :func:`airhealth.fit` (``"hac"``: Newey–West; ``hac_lags``
        may be given too).
    **model_options
        ``outcome``, ``exposure`` and any other :class:`~airhealth.model.spec.ModelSpec` option.

    Returns
    -------
    DataFrame
        One row per model: ``outcome, exposure, lag, trend_df_per_year, per, unit, coef, se, rr, rr_low,
        rr_high, percent_change, p_value, dispersion, n_params, qaic, qaic_common, delta_qaic_common,
        common_dispersion, qaic_common_from, n_days, days, first_day, last_day, interval`` (and
        ``hac_lags`` with ``interval="hac"``). ``days`` is ``"common"`` (the days usable by every model)
        or ``"own"``; ``first_day`` and ``last_day`` bound the days used. ``qaic`` uses each model's own
        dispersion; ``qaic_common`` the dispersion of the largest model compared (``qaic_common_from``,
        also in ``table.attrs["qaic_common"]``); ``delta_qaic_common`` is the difference from the smallest
        ``qaic_common``. Each row equals the corresponding single fit on the same days (to rounding).

    Raises
    ------
    SpecificationError
        An empty or bare-string ``lags``, a lag given twice, an empty or non-numeric ``trend_df_per_year``
        list, a value given twice or not > 0, several df values with ``seasonality="fourier"``.
    DataError, FitError
        What :func:`airhealth.fit` raises for the first model that cannot be fitted (the same check
        functions run for every model); a DataError when ``common_days=True`` leaves too few days.

    Warns
    -----
    DataWarning
        ``common_days=False`` and the models use different days: their QAIC values are not comparable.
    DataWarning, DispersionWarning, ConvergenceWarning
        What :func:`airhealth.fit` gives for each model on the same data.

    Notes
    -----
    QAIC (Peng, Dominici & Louis 2006) is ``-2 log L / c + 2 p`` with ``log L`` the Poisson
    log-likelihood, ``p`` the number of coefficients and ``c`` the dispersion. With each model's own ``c``
    (``qaic``) a model that explains more of the extra-Poisson variation is rewarded twice; Burnham &
    Anderson (2002, section 6.2) use one variance-inflation factor ``c`` for every model, estimated from
    the most general one (``qaic_common``; they also count ``c`` as a parameter, which adds the same 2 to
    every model and changes no difference). Families without a dispersion (Poisson, negative binomial) give
    the AIC in both columns.

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
    Burnham KP, Anderson DR (2002). *Model Selection and Multimodel Inference*, 2nd ed. Springer,
    section 6.2 (QAIC with one variance-inflation factor from the most general model).
    """
    _check_lags(lags, model_options)
    dfs = _df_values(trend_df_per_year, model_options)
    options = {**model_options, "interval": interval}
    groups = [[ModelSpec.from_options(lag=lag, trend_df_per_year=df, **options) for lag in lags] for df in dfs]
    require_one_effect(groups[0][0].modifier, "compare")
    _check_distinct([s.lag.label for s in groups[0]], "lag", "lags")
    frame = _frame(data, groups[0])
    label = "lag structures" if len(dfs) == 1 else "models"
    steps = progress([(g, i) for g in range(len(groups)) for i in range(len(lags))], label=label, enabled=show_progress)
    rows: dict[tuple[int, int], dict[str, Any]] = {}
    masks: list[np.ndarray] = []
    keep, grid, shared = None, None, None
    for g, i in steps:
        if i == 0:
            grid = _grid(frame, groups[g])
            if common_days:
                keep = _common([d.used for d in grid.designs], grid.designs) if keep is None else keep
                grid = _on_days(grid, keep)
            with grid.threads():
                shared = _confounder_fit(grid) if grid.shared else None
        rows[(i, g)] = _fit_row(grid, shared, i, per, level)
        masks.append(grid.designs[i].used)
    if not common_days:
        _warn_if_days_differ(masks)
    ordered = [{**rows[(i, g)], "trend_df_per_year": dfs[g]} for i in range(len(lags)) for g in range(len(dfs))]
    return _table(ordered, common_days, groups[0][0].family == "quasipoisson")


def _fit_row(grid: _Grid, shared, i: int, per: float, level: float) -> dict[str, Any]:
    """Fit model ``i`` of ``grid`` (shared work when it applies, else its single fit) and make its row."""
    spec, design = grid.specs[i], grid.designs[i]
    with grid.threads():
        if not grid.shared:
            design = grid.fitting_design(i)
            row = _result_row(fitted_result(design, spec)[0], per, level)
        else:
            fit = _exposure_fit(grid, shared, i)
            warn_if_suspicious(design, spec, fit.dispersion)
            row = _row(spec, fit, design, per, level)
    dates = design.calendar[design.used]
    return {**row, "first_day": dates[0], "last_day": dates[-1]}


def _table(rows: list[dict[str, Any]], common_days: bool, quasi: bool) -> pd.DataFrame:
    """The comparison table: rows in order, QAIC with a common dispersion, the days used."""
    columns = TABLE_COLUMNS + (["hac_lags"] if any("hac_lags" in r for r in rows) else [])
    table = pd.DataFrame(rows)
    table["days"] = "common" if common_days else "own"
    table, reference = add_common_qaic(table, quasi)
    table.attrs["qaic_common"] = reference
    table.attrs["days"] = "common" if common_days else "own"
    return table[columns].reset_index(drop=True)


def _df_values(value: Any, model_options: dict[str, Any]) -> list[Any]:
    """``trend_df_per_year`` as a list of values (each checked by :class:`ModelSpec`)."""
    values = list(value) if isinstance(value, list | tuple | np.ndarray | pd.Series) else [value]
    if not values:
        raise SpecificationError("trend_df_per_year is an empty list; give one value (e.g. 7) or several (4, 6, 8).")
    for v in values:
        if isinstance(v, bool) or not isinstance(v, int | float | np.integer | np.floating):
            raise SpecificationError(
                f"trend_df_per_year value {v!r} is not a number; give numbers > 0, e.g. [4, 6, 8, 10, 12]."
            )
    _check_distinct(values, "trend_df_per_year value", "trend_df_per_year")
    if len(values) > 1 and model_options.get("seasonality", "spline") != "spline":
        raise SpecificationError(
            f"trend_df_per_year={values} applies only to the time spline, but seasonality="
            f"{model_options['seasonality']!r}; give one value or use seasonality='spline'."
        )
    return values


def _check_distinct(values: Sequence[Any], what: str, option: str) -> None:
    seen = set()
    for v in values:
        if v in seen:
            raise SpecificationError(f"{what} {v!r} is given twice in {option}; give each once.")
        seen.add(v)


def _warn_if_days_differ(masks: list[np.ndarray]) -> None:
    """Warn when models compared by QAIC were fitted on different days (``common_days=False``)."""
    if all(np.array_equal(masks[0], m) for m in masks[1:]):
        return
    counts = [int(m.sum()) for m in masks]
    warn_user(
        f"the models compared use different days ({min(counts)} to {max(counts)} days, common_days=False): "
        "their QAIC values (qaic, qaic_common) are not comparable; use common_days=True (the default) to "
        "choose between them by QAIC.",
        DataWarning,
    )
