r"""Attributable numbers and fractions: from a fitted model, a published coefficient, or pooled estimates.

.. math::

    \mathrm{AN} = \sum_t y_t \left(1 - e^{-\beta \max(x_t - x_0,\, 0)}\right), \qquad
    \mathrm{AF} = \mathrm{AN} / \sum_t y_t,

over the days counted, with :math:`x_t` the model's exposure (the lag day, or the mean over a moving-average
window) and :math:`x_0` the counterfactual. Distributed lags (backward perspective by default, forward as an
option) and non-linear exposure–responses follow :mod:`airhealth.burden.excess`; intervals
:mod:`airhealth.burden.simulation`. See ``docs/burden.md``.

A burden assumes that the association is causal and that the counterfactual is achievable: every output
carries :data:`airhealth.burden.result.CAUTION`.

References
----------
Gasparrini A, Leone M (2014). Attributable risk from distributed lag models. BMC Med Res Methodol 14:55.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd

from .._choices import check_choice
from .._warn import warn_user
from ..errors import DataWarning, SpecificationError
from ..model.bases.exposure_lag import ExposureLagBasis, LinearResponse
from ..model.design import model_frame
from ..model.effects import normal_quantile
from ..model.group_effects import require_one_effect
from ..model.lag_predictions import find_lag_term, minimum_risk_exposure
from ..model.result import FitResult
from ..model.spec import ModelSpec, display_unit
from .counterfactual import Counterfactual, resolve_counterfactual
from .excess import DailyExcess, Perspective, Side, frame_rows, model_exposure_rows
from .result import BurdenResult, build_result
from .simulation import DEFAULT_DRAWS, DEFAULT_SEED, check_draws, simulate

__all__ = ["burden", "burden_from_estimate", "burden_pooled"]

MINIMUM_RISK = "minimum-risk"


def _checked_options(side: Any, perspective: Any, draws: Any, seed: Any, level: Any) -> tuple[int, int]:
    check_choice("side", side, Side)
    check_choice("perspective", perspective, Perspective)
    normal_quantile(level)  # validates the level
    return check_draws(draws, seed)


def _cells(parts: list[tuple[str, DailyExcess]]) -> tuple[np.ndarray, np.ndarray, np.ndarray, pd.DataFrame]:
    """Stack the cities' days; cells are runs of days of one calendar month of one city."""
    rows = np.vstack([p.rows for _, p in parts])
    cases = np.concatenate([p.cases for _, p in parts])
    frame = pd.concat(
        [pd.DataFrame({"city": name, "date": p.dates, "cases": p.cases}) for name, p in parts], ignore_index=True
    )
    frame["year"], frame["month"] = frame["date"].dt.year, frame["date"].dt.month
    key = frame[["city", "year", "month"]]
    new = (key != key.shift()).any(axis=1).to_numpy()
    starts = np.flatnonzero(new)
    cell_id = np.cumsum(new) - 1
    frame["positive"] = frame["cases"].where(frame["cases"] > 0)
    cells = frame.groupby(cell_id).agg(
        city=("city", "first"), year=("year", "first"), month=("month", "first"), days=("date", "size"),
        cases=("cases", "sum"), smallest=("positive", "min"),
    )  # fmt: skip
    return rows, cases, starts, cells.reset_index(drop=True)


def _compute(
    parts: list[tuple[str, DailyExcess]],
    theta: np.ndarray,
    cov: np.ndarray,
    counterfactual: Counterfactual,
    spec: ModelSpec,
    *,
    draws: int,
    seed: int,
    level: float,
    notes: list[str],
    **fields: Any,
) -> BurdenResult:
    """Simulate the burden of ``parts`` and build the result, described by ``spec`` and ``fields``."""
    fields.update(outcome=spec.outcome, exposure=spec.exposure, lag=spec.lag.label, unit=spec.unit)
    if sum(p.n_days for _, p in parts) == 0:
        left = pd.concat([p.left_out for _, p in parts], ignore_index=True)
        reasons = left["reason"].value_counts().to_dict() if len(left) else {}
        raise SpecificationError(
            f"no day can be counted for the burden: every day lacks the exposure or the outcome ({reasons}); "
            "check the exposure and outcome columns and the lag."
        )
    rows, cases, starts, cells = _cells(parts)
    if not np.any(rows):
        side = {"above": "above", "below": "below", "both": "different from"}[fields["side"]]
        message = (
            f"no day's exposure is {side} the counterfactual {counterfactual.value:g} "
            f"{counterfactual.unit}: the attributable number is 0."
        )
        notes.append(message)
        warn_user(message, DataWarning)
    sim = simulate(rows, cases, starts, theta, cov, draws, seed)
    left_out = pd.concat([p.left_out.assign(city=name) for name, p in parts], ignore_index=True)
    if cells["city"].nunique() == 1:
        left_out = left_out.drop(columns="city")
    return build_result(
        cells, sim, left_out, level=level, counterfactual=counterfactual, draws=draws, seed=seed,
        notes=tuple(notes), **fields,
    )  # fmt: skip


def _burden_frame(data: pd.DataFrame, spec: ModelSpec) -> pd.DataFrame:
    """The validated daily frame of the outcome and exposure only (the guards of every fit)."""
    slim = spec.replace(
        temperature=None, humidity=None, confounders=(), offset=None, holidays=None, holiday_subdivision=None
    )
    return model_frame(data, slim)


def _rows_of(
    frame: pd.DataFrame, spec: ModelSpec, basis: ExposureLagBasis, x0: float, side: Side, perspective: Perspective
) -> DailyExcess:
    dates = pd.DatetimeIndex(frame[spec.date])
    x = frame[spec.exposure].to_numpy(dtype=float, na_value=np.nan)
    y = frame[spec.outcome].to_numpy(dtype=float, na_value=np.nan)
    return frame_rows(dates, x, y, basis, x0, side, perspective)


def _fit_counterfactual(result: FitResult, given: Any, pollutant: str | None) -> Counterfactual:
    if isinstance(given, str) and given.strip().lower() == MINIMUM_RISK:
        if getattr(result.spec.lag, "is_nonlinear", False) is False:
            raise SpecificationError(
                "counterfactual 'minimum-risk' needs a non-linear exposure-response (an ExposureLagBasis with a "
                "spline or threshold response); for a linear model give a level, e.g. a guideline value."
            )
        lowest = minimum_risk_exposure(result)
        return Counterfactual(
            lowest.exposure, result.spec.unit, "minimum-risk exposure", "lowest point of the fitted curve", lowest.note
        )
    return resolve_counterfactual(given, result.spec.unit, exposure=result.spec.exposure, pollutant=pollutant)


def _rows_from_fit(result: FitResult, x0: float, side: Side) -> DailyExcess:
    """Rows of a linear single-day or moving-average fit from its own design (the days it used)."""
    matrix = result.design_matrix
    dates = pd.DatetimeIndex(matrix.index)
    z = matrix[result.exposure_columns[0]].to_numpy()
    y = result.observed.to_numpy(dtype=float)
    part = model_exposure_rows(dates, z, y, x0, side, np.full(len(z), "", dtype=object))
    left = result.dropped[["date", "reason"]]
    return DailyExcess(part.dates, part.rows, part.cases, left)


def burden(
    result: FitResult,
    counterfactual: float | str,
    data: pd.DataFrame | None = None,
    *,
    side: Side = "above",
    perspective: Perspective = "backward",
    draws: int = DEFAULT_DRAWS,
    seed: int = DEFAULT_SEED,
    level: float = 0.95,
    pollutant: str | None = None,
) -> BurdenResult:
    """Deaths or admissions attributable to exposure beyond a counterfactual, from a fitted model.

    Parameters
    ----------
    result : FitResult
        A fitted model (single day, moving average, distributed lag, or an exposure–lag basis with a
        non-linear exposure–response).
    counterfactual : float or str
        A level in the exposure's unit, a preset name such as ``"who-guideline:pm2.5:24h"`` (see
        :func:`airhealth.burden.preset_table`; converted to the exposure's unit where
        :mod:`airhealth.burden.counterfactual` allows), or ``"minimum-risk"`` for the exposure of lowest
        cumulative risk of a non-linear curve (e.g. the minimum-mortality temperature).
    data : DataFrame, optional
        Daily data (as given to the fit, or another period of the same city). Needed for distributed lags,
        non-linear curves and the forward perspective; for a linear single-day or moving-average model the
        fit's own days are used when it is left out.
    side : {"above", "below", "both"}
        Exposure beyond the counterfactual on which side counts (``"below"`` for cold, ``"both"`` for all
        days).
    perspective : {"backward", "forward"}
        Distributed lags: cases of each day due to past exposures (default), or future cases due to each
        day's exposure (Gasparrini & Leone 2014).
    draws, seed : int
        Monte Carlo draws (at least 100) and the seed of the generator; the defaults make results reproducible.
    level : float
        Level of the intervals.
    pollutant : str, optional
        The exposure's pollutant (``"pm2.5"``, ``"pm10"``, ``"no2"``, ``"o3"``, ``"so2"``, ``"co"``), checked
        against a preset's; by default read from the exposure column's name, and a preset is refused when it
        cannot be told from it.

    Returns
    -------
    BurdenResult

    Examples
    --------
    >>> import airhealth
    >>> from airhealth.burden import burden
    >>> data = airhealth.load_sample()
    >>> fitted = airhealth.fit(data, "deaths_all", "pm25", lag="0-1", temperature="temperature")  # doctest: +SKIP
    >>> burden(fitted, "who-guideline:pm2.5:24h").to_dict()["attributable"]  # doctest: +SKIP
    """
    if not isinstance(result, FitResult):
        raise SpecificationError(f"burden needs a FitResult from airhealth.fit, got {type(result).__name__}.")
    require_one_effect(result.spec.modifier, "burden")
    draws, seed = _checked_options(side, perspective, draws, seed, level)
    term = find_lag_term(result)
    counter = _fit_counterfactual(result, counterfactual, pollutant)
    spec, notes = result.spec, []
    simple = term.basis.response.is_linear and not term.basis.is_distributed and perspective == "backward"
    if data is None:
        if not simple:
            raise SpecificationError(
                f"a burden for lag {spec.lag.label} ({perspective} perspective) needs the daily exposure series: "
                "pass data=... (the data the model was fitted on)."
            )
        part = _rows_from_fit(result, counter.value, side)
        notes.append("Days counted: the days used by the fit.")
    else:
        part = _rows_of(_burden_frame(data, spec), spec, term.basis, counter.value, side, perspective)
    return _compute(
        [(spec.exposure, part)], term.coef, term.cov, counter, spec, draws=draws, seed=seed, level=level,
        notes=notes, side=side, perspective=perspective, source="fitted model",
    )  # fmt: skip


def _estimate(coef: Any, se: Any) -> tuple[np.ndarray, np.ndarray]:
    if se is None:
        raise SpecificationError(
            "a coefficient without its standard error gives no interval: give se=... (from a published 95% "
            "interval of the relative risk per P units, se = (log(rr_high) - log(rr_low)) / (2 * 1.96 * P))."
        )
    try:
        b, s = float(coef), float(se)
    except (TypeError, ValueError):
        raise SpecificationError(
            f"coef and se must be numbers (log relative risk per unit), got {coef!r}, {se!r}."
        ) from None
    if not np.isfinite(b) or not np.isfinite(s) or s <= 0:
        raise SpecificationError(f"coef must be finite and se a positive number, got coef={coef!r}, se={se!r}.")
    return np.array([b]), np.array([[s * s]])


def _single_coefficient_basis(lag: Any) -> ExposureLagBasis:
    basis = ExposureLagBasis(LinearResponse(), lag)
    if basis.is_distributed:
        raise SpecificationError(
            f"lag {basis.lag.label} is a distributed lag, which has one coefficient per lag basis column; a single "
            "published coefficient goes with a single day ('0') or a moving average ('0-1'). For distributed "
            "lags fit the model and use burden(result, ...)."
        )
    return basis


def burden_from_estimate(
    data: pd.DataFrame,
    outcome: str,
    exposure: str,
    coef: float,
    se: float | None,
    counterfactual: float | str,
    *,
    lag: Any = "0",
    unit: str = "µg/m³",
    date: str = "date",
    side: Side = "above",
    draws: int = DEFAULT_DRAWS,
    seed: int = DEFAULT_SEED,
    level: float = 0.95,
    pollutant: str | None = None,
    **read_options: Any,
) -> BurdenResult:
    """The burden of a given (e.g. published) log relative risk per unit, ``coef`` with ``se``, on ``data``.

    ``coef`` is per unit of ``exposure`` on the lag day or averaged over the moving-average window ``lag``;
    ``unit`` is the exposure's unit (checked against a preset's) and ``pollutant`` its pollutant (as
    :func:`burden`). ``read_options`` are the
    :class:`~airhealth.model.spec.ModelSpec` reading options ``na_values`` and ``date_format``. Other
    parameters as :func:`burden`.
    """
    draws, seed = _checked_options(side, "backward", draws, seed, level)
    theta, cov = _estimate(coef, se)
    basis = _single_coefficient_basis(lag)
    unknown = sorted(set(read_options) - {"na_values", "date_format"})
    if unknown:
        raise SpecificationError(f"unknown option {unknown[0]!r}; the reading options are na_values and date_format.")
    spec = ModelSpec(outcome, exposure, basis.lag, date=date, temperature=None, unit=unit, **read_options)
    counter = resolve_counterfactual(counterfactual, spec.unit, exposure=exposure, pollutant=pollutant)
    part = _rows_of(_burden_frame(data, spec), spec, basis, counter.value, side, "backward")
    return _compute(
        [(exposure, part)], theta, cov, counter, spec, draws=draws, seed=seed, level=level, notes=[], side=side,
        perspective="backward", source=f"given coefficient {float(coef):.6g} (SE {float(se):.6g}) per {spec.unit}",
    )  # fmt: skip


def _pooled_lag_unit(pooled: Any, lag: Any, unit: str | None) -> tuple[Any, str]:
    """The lag and unit of a pooled burden: the given ones checked against what ``pooled`` records."""
    recorded_lag, recorded_unit = getattr(pooled, "lag", None), getattr(pooled, "unit", None)
    if lag is None and recorded_lag is None:
        raise SpecificationError(
            "the pooled result does not record the lag its cities were fitted with (it was not pooled from a "
            "fit_cities table): give lag=... (e.g. lag='0-1'), the lag of the pooled coefficient."
        )
    if lag is not None and recorded_lag is not None:
        given = ExposureLagBasis(LinearResponse(), lag).lag.label
        if given != recorded_lag:
            raise SpecificationError(
                f"lag={given!r} but the pooled coefficient is for lag {recorded_lag!r} (the lag its cities were "
                "fitted with); leave out lag= or give the same lag."
            )
    if unit is None and recorded_unit is None:
        raise SpecificationError(
            "the pooled result does not record the exposure's unit (it was not pooled from a fit_cities table): "
            "give unit=... (e.g. unit='µg/m³'), the unit the coefficient is per."
        )
    if unit is not None and recorded_unit is not None and display_unit(unit) != display_unit(recorded_unit):
        raise SpecificationError(
            f"unit={unit!r} but the pooled coefficient is per {recorded_unit} (the unit its cities were fitted "
            "with); leave out unit= or convert the coefficient."
        )
    return (recorded_lag if lag is None else lag), (recorded_unit if unit is None else unit)


def _pooled_coefficients(pooled: Any, lag: Any) -> tuple[ExposureLagBasis, np.ndarray, np.ndarray, str]:
    """The lag basis, pooled coefficients, their covariance and a description, checked against each other."""
    from ..cities import MultivariatePooled, PooledEffect

    if isinstance(pooled, PooledEffect):
        if len(pooled.terms) > 1:
            raise SpecificationError(
                f"the pooled estimate has moderators ({', '.join(pooled.terms[1:])}); its coefficient is the effect "
                "where every moderator is 0. Pool without moderators for a burden, or use burden_from_estimate per "
                "city with the prediction of pooled.predict(...)."
            )
        basis = _single_coefficient_basis(lag)
        source = f"pooled estimate ({pooled.method}, {pooled.k} cities)"
        return basis, np.array([pooled.coef]), np.array([[pooled.se**2]]), source
    if isinstance(pooled, MultivariatePooled):
        basis = ExposureLagBasis(LinearResponse(), lag)
        if basis.n_columns != len(pooled.coef):
            raise SpecificationError(
                f"the pooled vector has {len(pooled.coef)} coefficients but lag {basis.lag.label} has "
                f"{basis.n_columns} basis columns; give the lag the cities were fitted with."
            )
        source = f"pooled coefficient vector ({pooled.method}, {pooled.k} cities)"
        return basis, np.asarray(pooled.coef), np.asarray(pooled.cov), source
    raise SpecificationError(
        f"burden_pooled needs the result of airhealth.pool or airhealth.pool_multivariate, got {type(pooled).__name__}."
    )


def burden_pooled(
    pooled: Any,
    cities: Mapping[str, pd.DataFrame],
    outcome: str,
    exposure: str,
    counterfactual: float | str,
    *,
    lag: Any = None,
    unit: str | None = None,
    date: str = "date",
    side: Side = "above",
    perspective: Perspective = "backward",
    draws: int = DEFAULT_DRAWS,
    seed: int = DEFAULT_SEED,
    level: float = 0.95,
    pollutant: str | None = None,
) -> BurdenResult:
    """A pooled estimate applied to each city's data.

    ``pooled`` is :func:`airhealth.pool` (one coefficient, without moderators; ``lag`` a single day or moving
    average) or :func:`airhealth.pool_multivariate` (the lag-basis coefficients of a distributed lag; ``lag`` the
    structure the cities were fitted with, e.g. ``"dl0-5"``). Every city's days are evaluated with the same draws
    of the pooled coefficients, so the total's interval accounts for the estimate being shared; ``table("city")``
    gives each city's burden. ``lag`` and ``unit`` default to those the pooled result records (the cities'
    :func:`airhealth.fit_cities` fits); one given that differs from the recorded one is an error, and so is
    leaving out one the result does not record (estimates pooled from a table made by hand). Other parameters
    as :func:`burden`.
    """
    if not isinstance(cities, Mapping) or not cities:
        raise SpecificationError("cities must be a mapping of city name to its daily data, with at least one city.")
    draws, seed = _checked_options(side, perspective, draws, seed, level)
    lag, unit = _pooled_lag_unit(pooled, lag, unit)
    basis, theta, cov, source = _pooled_coefficients(pooled, lag)
    spec = ModelSpec(outcome, exposure, basis.lag, date=date, temperature=None, unit=unit)
    counter = resolve_counterfactual(counterfactual, spec.unit, exposure=exposure, pollutant=pollutant)
    parts = []
    for name, data in cities.items():
        parts.append((str(name), _rows_of(_burden_frame(data, spec), spec, basis, counter.value, side, perspective)))
    return _compute(
        parts, theta, cov, counter, spec, draws=draws, seed=seed, level=level, notes=[], side=side,
        perspective=perspective, source=source,
    )  # fmt: skip
