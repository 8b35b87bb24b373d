r"""Predictions from fitted lag terms: per-lag and cumulative effects, exposure–response curves, minima.

Every prediction is a linear combination :math:`b^\top\theta` of the term's coefficients, so its
delta-method (here exact) variance is :math:`b^\top V b` with :math:`V` the term's block of the full
covariance matrix (scaled by the dispersion for quasi-Poisson). For an exposure–response basis :math:`f`,
lag basis :math:`C` and reference exposure :math:`r`:

* effect of exposure :math:`x` at lag :math:`l`:  :math:`b = (f(x) - f(r)) \otimes C_{l\cdot}`;
* cumulated over all lags:  :math:`b = (f(x) - f(r)) \otimes C^\top\mathbf 1`.

With a linear exposure–response, :math:`f(x) - f(r) = x - r`, so the per-lag effects are those of
:meth:`FitResult.lag_effects` (``C θ``, covariance ``C V Cᵀ``) and the cumulative one that of
:meth:`FitResult.effect` (SE :math:`\sqrt{\mathbf 1^\top V \mathbf 1}` for an unconstrained lag).

The exposure of lowest cumulative risk (for temperature, the minimum-mortality temperature) is found on a
fine grid within the observed range.

References
----------
Gasparrini A, Armstrong B, Kenward MG (2010). Distributed lag non-linear models. Statistics in Medicine
29:2224–2234.
Schwartz J (2000). The distributed lag between air pollution and daily deaths. Epidemiology 11:320–326.
Tobías A, Armstrong B, Gasparrini A (2017). Investigating uncertainty in the minimum mortality temperature.
Epidemiology 28:72–76 (the minimum's uncertainty needs resampling; the band given here is descriptive).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from .._warn import warn_user
from ..errors import DataWarning, SpecificationError
from .bases.exposure_lag import ExposureLagBasis, ExposureLagTerm, LinearResponse
from .effects import normal_quantile
from .result import FitResult

__all__ = [
    "LagTerm",
    "MinimumRisk",
    "exposure_response",
    "find_lag_term",
    "lag_response",
    "minimum_risk_exposure",
]

GRID_SIZE = 400


@dataclass(frozen=True)
class LagTerm:
    """A fitted lag term of a result: its exposure–lag basis, exposure name, coefficients and covariance."""

    basis: ExposureLagBasis
    exposure: str
    coef: np.ndarray
    cov: np.ndarray

    @property
    def summary(self) -> Any:
        return self.basis.response.summary

    def predict(self, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Log-scale estimates ``rows @ θ`` and their SEs ``sqrt(diag(rows V rowsᵀ))`` (last axis = θ)."""
        coef = rows @ self.coef
        se = np.sqrt(np.maximum(np.einsum("...p,pq,...q->...", rows, self.cov, rows), 0.0))
        return coef, se


def _block(result: FitResult, names: Sequence[str]) -> tuple[np.ndarray, np.ndarray]:
    missing = [n for n in names if n not in result.coef.index]
    if missing:
        raise SpecificationError(f"the fitted model has no coefficient {missing[0]!r}.")
    cols = list(names)
    return result.coef[cols].to_numpy(), result.cov.loc[cols, cols].to_numpy()


def find_lag_term(result: FitResult, term: str | ExposureLagTerm | None = None) -> LagTerm:
    """The exposure term (``term=None``) or an exposure–lag confounder term (by column, name or object)."""
    if term is None:
        lag = result.spec.lag
        basis = lag if isinstance(lag, ExposureLagBasis) else ExposureLagBasis(LinearResponse(), lag)
        return LagTerm(basis, result.spec.exposure, *_block(result, result.exposure_columns))
    name = term.name if isinstance(term, ExposureLagTerm) else str(term)
    bases = {k: b for k, b in (result.bases or {}).items() if isinstance(b, ExposureLagBasis)}
    matches = [k for k in bases if k == name] or [k for k in bases if k.startswith(f"{name}[")]
    if len(matches) != 1:
        known = ", ".join(repr(k) for k in bases) or "none"
        what = "several" if matches else "no"
        raise SpecificationError(
            f"the model has {what} exposure-lag terms matching {name!r}; its exposure-lag terms are: {known}."
        )
    basis = bases[matches[0]]
    column = matches[0][: matches[0].index("[")]
    return LagTerm(basis, column, *_block(result, basis.column_names(column)))


def _grid(lt: LagTerm, size: int, within: tuple[float, float] | None = None) -> np.ndarray:
    if lt.summary is None:
        raise SpecificationError(
            f"the lag term of {lt.exposure!r} does not record the observed exposure range; give exposure "
            "values with values=[...], or fit with lag=ExposureLagBasis(LinearResponse(), lag) to keep the range."
        )
    lo, hi = lt.summary.low, lt.summary.high
    if within is not None:
        lt.basis.response.check_in_range(np.asarray(within), "range limit", lt.exposure)
        lo, hi = float(min(within)), float(max(within))
    return np.linspace(lo, hi, size)


def _reference(lt: LagTerm, reference: float | None) -> float:
    if reference is None:
        if lt.basis.response.is_linear:
            return 0.0
        return minimum_risk_exposure_of(lt).exposure
    if not np.isfinite(reference):
        raise SpecificationError(f"the reference exposure must be a finite number, got {reference!r}.")
    lt.basis.response.check_in_range(np.array([reference]), "reference value", lt.exposure)
    return float(reference)


def _values(lt: LagTerm, given: Any) -> np.ndarray:
    if given is None:
        return _grid(lt, 100)
    values = np.atleast_1d(np.asarray(given, dtype=float))
    if values.ndim != 1 or values.size == 0 or not np.isfinite(values).all():
        raise SpecificationError(f"values must be one or more finite exposure values, got {given!r}.")
    s = lt.summary
    if s is not None and ((values < s.low) | (values > s.high)).any():
        warn_user(
            f"some of the exposure values lie outside the observed range of {lt.exposure!r} "
            f"({s.low:g} to {s.high:g}); the curve there is an extrapolation.",
            DataWarning,
        )
    return values


def _table(coef: np.ndarray, se: np.ndarray, z: float, reference: float, **index: np.ndarray) -> pd.DataFrame:
    out = pd.DataFrame({k: v.ravel() for k, v in index.items()})
    out.attrs["reference"] = reference
    out["coef"], out["se"] = coef.ravel(), se.ravel()
    out["rr"] = np.exp(out["coef"])
    out["rr_low"] = np.exp(out["coef"] - z * out["se"])
    out["rr_high"] = np.exp(out["coef"] + z * out["se"])
    return out


def exposure_response(
    result: FitResult,
    values: Sequence[float] | np.ndarray | None = None,
    reference: float | None = None,
    per_lag: bool = False,
    term: str | ExposureLagTerm | None = None,
    level: float = 0.95,
) -> pd.DataFrame:
    """Relative risk at exposure ``values`` against ``reference``, cumulated over lags or per lag.

    Parameters
    ----------
    result : FitResult
        A fitted model whose exposure term (or confounder ``term``) is a lag structure or exposure–lag basis.
    values : sequence of float, optional
        Exposure values (default: 100 values spanning the observed range). Values outside the observed
        range give a :class:`~airhealth.errors.DataWarning` (extrapolation).
    reference : float, optional
        Reference exposure, which must lie within the observed range. Default: the exposure of lowest
        cumulative risk for a non-linear term, 0 for a linear one (so ``values=[10]`` gives the RR per 10 units).
    per_lag : bool
        One row per exposure value and lag instead of the cumulative effect.
    term : str or ExposureLagTerm, optional
        An exposure–lag confounder term (e.g. ``"temperature"``) instead of the exposure term.
    level : float
        Confidence level of the Wald intervals.

    Returns
    -------
    DataFrame
        Columns ``exposure`` [, ``lag``], ``coef`` (log RR), ``se``, ``rr``, ``rr_low``, ``rr_high``;
        the reference used is in ``attrs["reference"]``.

    Examples
    --------
    >>> import airhealth
    >>> from airhealth.model.bases.exposure_lag import ExposureLagBasis, SplineResponse
    >>> res = airhealth.fit(airhealth.load_sample(), "deaths_all", "temperature",
    ...                     lag=ExposureLagBasis(SplineResponse(df=4), "dl0-21:spline4"))  # doctest: +SKIP
    >>> exposure_response(res, values=[-2.0, 25.0], reference=19.0)  # doctest: +SKIP
    """
    lt = find_lag_term(result, term)
    z = normal_quantile(level)
    values = _values(lt, values)
    ref = _reference(lt, reference)
    if per_lag:
        rows = lt.basis.contrast_rows(values, ref, cumulative=False)
        coef, se = lt.predict(rows)
        lags = np.broadcast_to(lt.basis.lags, coef.shape)
        return _table(coef, se, z, ref, exposure=np.broadcast_to(values[:, None], coef.shape), lag=lags)
    coef, se = lt.predict(lt.basis.contrast_rows(values, ref, cumulative=True))
    return _table(coef, se, z, ref, exposure=values)


def lag_response(
    result: FitResult,
    value: float | None = None,
    reference: float | None = None,
    per: float = 10.0,
    term: str | ExposureLagTerm | None = None,
    level: float = 0.95,
) -> pd.DataFrame:
    """Relative risk at each lag (``lag, coef, se, rr, rr_low, rr_high``).

    For a linear exposure term with ``value=None`` this is :meth:`FitResult.lag_effects` for an increase of
    ``per`` units; otherwise the effect of exposure ``value`` against ``reference`` at each lag.
    """
    lt = find_lag_term(result, term)
    if value is None:
        if term is None and lt.basis.response.is_linear:
            return result.lag_effects(per=per, level=level)
        raise SpecificationError("give the exposure value at which to show the lag-response, e.g. value=30.")
    table = exposure_response(result, values=[value], reference=reference, per_lag=True, term=term, level=level)
    return table.drop(columns="exposure")


@dataclass(frozen=True)
class MinimumRisk:
    """The exposure at which the cumulative exposure–response curve is lowest.

    ``low`` and ``high`` bound the grid values whose cumulative risk is not significantly above the
    minimum (pointwise Wald tests at ``level``): a descriptive band, not a confidence interval for the
    minimum itself, which would need resampling (Tobías et al. 2017).
    """

    exposure: float
    percentile: float
    low: float
    high: float
    at_boundary: bool
    level: float
    note: str


def minimum_risk_exposure_of(
    lt: LagTerm, within: tuple[float, float] | None = None, grid_size: int = GRID_SIZE, level: float = 0.95
) -> MinimumRisk:
    """:func:`minimum_risk_exposure` for an already located lag term."""
    grid = _grid(lt, grid_size, within)
    coef, _ = lt.predict(lt.basis.contrast_rows(grid, grid[0], cumulative=True))
    best = int(np.argmin(coef))
    diff, se = lt.predict(lt.basis.contrast_rows(grid, grid[best], cumulative=True))
    with np.errstate(divide="ignore", invalid="ignore"):
        flat = (diff <= normal_quantile(level) * se) | (se == 0)
    edge = best in (0, grid.size - 1)
    note = (
        f"{lt.exposure} of lowest cumulative risk {grid[best]:.3g}; values from {grid[flat].min():.3g} to "
        f"{grid[flat].max():.3g} have risk not significantly above it (pointwise, {level:.0%})."
    )
    if edge:
        note += " The minimum is at the edge of the range searched, so it may lie beyond the data."
    pct = lt.summary.percentile_of(grid[best])
    return MinimumRisk(float(grid[best]), pct, float(grid[flat].min()), float(grid[flat].max()), edge, level, note)


def minimum_risk_exposure(
    result: FitResult,
    term: str | ExposureLagTerm | None = None,
    within: tuple[float, float] | None = None,
    grid_size: int = GRID_SIZE,
    level: float = 0.95,
) -> MinimumRisk:
    """The exposure of lowest cumulative risk (for temperature: the minimum-mortality temperature).

    The cumulative log relative risk is evaluated on ``grid_size`` equally spaced values over the observed
    exposure range (or the narrower range ``within=(low, high)``, e.g. the 1st–99th percentiles, to keep
    clear of sparse extremes) and its lowest point returned as a :class:`MinimumRisk`.

    Examples
    --------
    >>> import airhealth
    >>> from airhealth.model.bases.exposure_lag import ExposureLagTerm, SplineResponse
    >>> term = ExposureLagTerm("temperature", SplineResponse(df=4), "dl0-21:spline4")
    >>> res = airhealth.fit(airhealth.load_sample(), "deaths_all", "pm25", lag="0-1",
    ...                     confounders=[term])  # doctest: +SKIP
    >>> minimum_risk_exposure(res, term="temperature").exposure  # doctest: +SKIP
    """
    if not isinstance(grid_size, int) or grid_size < 10:
        raise SpecificationError(f"grid_size must be a whole number >= 10, got {grid_size!r}.")
    return minimum_risk_exposure_of(find_lag_term(result, term), within, grid_size, level)
