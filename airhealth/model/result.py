"""The result of a fit: immutable, holding everything inference and reporting need.

The exposure term's per-lag coefficients are ``C θ`` (``C`` the lag basis, ``θ`` its coefficients) with
covariance ``C V Cᵀ``; the cumulative (overall) effect is ``wᵀθ`` with ``w = Cᵀ1`` and SE
``sqrt(wᵀ V w)`` — for a single lag or a moving average this is simply the one exposure coefficient.

References
----------
Peng RD, Dominici F, Louis TA (2006). Model choice in time series studies of air pollution and mortality.
J R Stat Soc A 169:179–203 (QAIC).
Schwartz J (2000). The distributed lag between air pollution and daily deaths. Epidemiology 11:320–326.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import FrozenInstanceError
from functools import partial
from types import MappingProxyType
from typing import Any, Literal

import numpy as np
import pandas as pd

from .._choices import check_choice
from ..errors import SpecificationError
from .effects import relative_risk
from .engine.variance import family_of
from .group_effects import copollutant_effects, effects_by_group, extra_record, modification_test
from .spec import ModelSpec

__all__ = ["FitResult"]

EffectScale = Literal["unit", "iqr"]
ResidualKind = Literal["deviance", "pearson", "response"]

#: Columns of one-row-per-model tables (:meth:`FitResult.summary`, ``compare``, report tables).
SUMMARY_COLUMNS = (
    "outcome", "exposure", "lag", "per", "coef", "se", "rr", "rr_low", "rr_high",
    "percent_change", "p_value", "dispersion", "qaic", "n_days",
)  # fmt: skip


def _own_copy(frame: pd.Series | pd.DataFrame) -> pd.Series | pd.DataFrame:
    """A private deep copy (data and index), so the caller's object and the result never share memory."""
    return frame.copy(deep=True)


def _frozen_array(values: np.ndarray | None) -> np.ndarray | None:
    """A private read-only copy of an array (``None`` stays ``None``)."""
    if values is None:
        return None
    own = np.array(values, dtype=float, copy=True)
    own.setflags(write=False)
    return own


def _frozen_view(values: np.ndarray | None) -> np.ndarray | None:
    """A read-only view of an array handed over by its builder (no copy; ``None`` stays ``None``)."""
    if values is None:
        return None
    view = np.asarray(values, dtype=float).view()
    view.setflags(write=False)
    return view


class FitResult:
    """A fitted time-series model of daily counts (read-only).

    Read-only means more than frozen attributes: every array and frame the result gives out (``coef``,
    ``cov``, ``fitted``, ``observed``, ``dropped``, ``std_err``, tables) is a fresh copy, and ``bases`` is
    a read-only mapping of immutable objects, so changing what you were given (``r.coef.iloc[-1] = 0``,
    ``r.cov.values[0, 0] = 0``, ``r.dropped.drop(..., inplace=True)``) never changes ``effect()``,
    ``to_dict()`` or predictions. This holds with or without pandas copy-on-write. The result keeps its own
    copies of what it is built from, too.

    Attributes
    ----------
    spec : ModelSpec
        What was fitted.
    coef : Series
        All coefficients (log scale), by column name.
    cov : DataFrame
        Their covariance, scaled by the dispersion for quasi-Poisson.
    dispersion : float
        Pearson χ² / residual df for quasi-Poisson; 1 otherwise.
    deviance, loglik, qaic : float
        Residual deviance, Poisson (or negative binomial) log-likelihood, and QAIC (quasi-Poisson; AIC for
        the other families).
    df_resid : int
        Residual degrees of freedom.
    n_days : int
        Days used in the fit.
    dropped : DataFrame
        Days of the calendar left out (``date``, ``reason``).
    fitted, observed : Series
        Fitted means and observed counts on the days used, indexed by date.
    exposure_columns : tuple of str
        Names of the exposure term's coefficients.
    exposure_iqr : float
        Interquartile range of the daily exposure (not its lagged or averaged form) on the days used, for
        effects per IQR; the same increment for every lag structure fitted on the same days.
    converged : bool
        Whether the engine met its convergence criterion; ``n_iter`` its iterations.
    theta : float or None
        Negative binomial θ (``None`` for the other families).
    bases : mapping
        The fitted bases of the confounder terms, by term name (read-only).
    aliased : tuple of str
        Confounder columns left out of the fit because the days used give them no support (e.g. spline
        columns of time inside a long gap), as R's ``glm`` reports aliased coefficients.
    notes : tuple of str
        Plain-language notes on how the fit was obtained (e.g. a negative binomial that fell back to Poisson).
    hac_lags : int or None
        Truncation lag of the Newey–West covariance when ``spec.interval == "hac"`` (``cov`` is then that
        sandwich); ``None`` for the model-based covariance.
    copollutant_correlations : tuple of float
        Correlation of the exposure with each of ``spec.copollutants`` on the days used
        (:mod:`airhealth.model.bases.copollutant`).
    groups : tuple
        Levels of ``spec.modifier`` (empty without a modifier); the exposure then has one term per level
        (:meth:`effects_by_group`, :meth:`modification_test`).
    strata : mapping or None
        For ``spec.design == "case-crossover"``: ``n_strata`` (strata in the fit),
        ``n_strata_without_events`` and ``n_strata_single_day`` (strata left out); ``None`` otherwise.
    """

    __slots__ = (
        "_bases", "_codes", "_coef", "_cov", "_dropped", "_fitted", "_matrix", "_observed", "aliased", "converged",
        "copollutant_correlations", "deviance", "df_resid", "dispersion", "exposure_columns", "exposure_iqr",
        "groups", "hac_lags", "loglik", "n_days", "n_iter", "notes", "qaic", "spec", "strata", "theta",
    )  # fmt: skip

    spec: ModelSpec
    dispersion: float
    deviance: float
    loglik: float
    qaic: float
    df_resid: int
    n_days: int
    exposure_columns: tuple[str, ...]
    exposure_iqr: float
    converged: bool
    n_iter: int
    theta: float | None
    aliased: tuple[str, ...]
    notes: tuple[str, ...]
    hac_lags: int | None
    copollutant_correlations: tuple[float, ...]
    groups: tuple[Any, ...]
    strata: Mapping[str, int] | None

    def __init__(
        self,
        spec: ModelSpec,
        coef: pd.Series,
        cov: pd.DataFrame,
        dispersion: float,
        deviance: float,
        loglik: float,
        qaic: float,
        df_resid: int,
        n_days: int,
        dropped: pd.DataFrame,
        fitted: pd.Series,
        observed: pd.Series,
        exposure_columns: Sequence[str],
        exposure_iqr: float,
        converged: bool,
        n_iter: int,
        theta: float | None = None,
        bases: Mapping[str, Any] | None = None,
        aliased: Sequence[str] = (),
        notes: Sequence[str] = (),
        design_matrix: np.ndarray | None = None,
        hac_lags: int | None = None,
        copollutant_correlations: Sequence[float] = (),
        groups: Sequence[Any] = (),
        group_codes: np.ndarray | None = None,
        strata: Mapping[str, int] | None = None,
        *,
        _copy: bool = True,
    ) -> None:
        own = _own_copy if _copy else (lambda frame: frame)
        freeze = _frozen_array if _copy else _frozen_view
        put = object.__setattr__
        for name, value in (
            ("spec", spec), ("_coef", own(coef)), ("_cov", own(cov)), ("dispersion", dispersion),
            ("deviance", deviance), ("loglik", loglik), ("qaic", qaic), ("df_resid", df_resid),
            ("n_days", n_days), ("_dropped", own(dropped)), ("_fitted", own(fitted)),
            ("_observed", own(observed)), ("exposure_columns", tuple(exposure_columns)),
            ("exposure_iqr", exposure_iqr), ("converged", converged), ("n_iter", n_iter), ("theta", theta),
            ("_bases", MappingProxyType(dict(bases or {}))), ("aliased", tuple(aliased)), ("notes", tuple(notes)),
            ("_matrix", freeze(design_matrix)), ("hac_lags", hac_lags),
            ("copollutant_correlations", tuple(float(r) for r in copollutant_correlations)),
            ("groups", tuple(groups)), ("_codes", None if group_codes is None else np.array(group_codes, dtype=int)),
            ("strata", None if strata is None else MappingProxyType(dict(strata))),
        ):  # fmt: skip
            put(self, name, value)

    @classmethod
    def _adopt(cls, *args: Any, **kwargs: Any) -> FitResult:
        """A result that takes the arguments of ``FitResult(...)`` over without copying them.

        Only for builders that hand over pandas objects made for this result and referenced nowhere else
        (:func:`airhealth.model.fitting.result_from_fit`); five deep copies cost about a third of a
        millisecond of a ~10 ms fit, and a copy of the design matrix (days × columns) more. Everything the
        result gives out is still a copy.
        """
        return cls(*args, **kwargs, _copy=False)

    def __setattr__(self, name: str, value: Any) -> None:
        raise FrozenInstanceError(f"a FitResult is read-only: {name!r} cannot be set; fit again with other options.")

    def __delattr__(self, name: str) -> None:
        raise FrozenInstanceError(f"a FitResult is read-only: {name!r} cannot be deleted.")

    def __reduce__(self) -> tuple[Any, tuple[Any, ...]]:  # pickling (process pools) rebuilds through __init__
        args = (
            self.spec, self._coef, self._cov, self.dispersion, self.deviance, self.loglik, self.qaic,
            self.df_resid, self.n_days, self._dropped, self._fitted, self._observed, self.exposure_columns,
            self.exposure_iqr, self.converged, self.n_iter, self.theta, dict(self._bases), self.aliased, self.notes,
        )  # fmt: skip
        # the design matrix and HAC lag go by keyword, so the positional arguments end with aliased, notes
        extra = {"copollutant_correlations": self.copollutant_correlations, "groups": self.groups}
        extra["group_codes"] = self._codes
        extra["strata"] = None if self.strata is None else dict(self.strata)
        return (partial(type(self), design_matrix=self._matrix, hac_lags=self.hac_lags, **extra), args)

    # -- what the result gives out: copies, or read-only ------------------------------------------
    @property
    def coef(self) -> pd.Series:
        """All coefficients (log scale), by column name (a copy)."""
        return self._coef.copy(deep=True)

    @property
    def cov(self) -> pd.DataFrame:
        """Covariance of the coefficients, scaled by the dispersion for quasi-Poisson (a copy)."""
        return self._cov.copy(deep=True)

    @property
    def dropped(self) -> pd.DataFrame:
        """Days of the calendar left out, with the reason (``date``, ``reason``; a copy)."""
        return self._dropped.copy(deep=True)

    @property
    def fitted(self) -> pd.Series:
        """Fitted means on the days used, indexed by date (a copy)."""
        return self._fitted.copy(deep=True)

    @property
    def observed(self) -> pd.Series:
        """Observed counts on the days used, indexed by date (a copy)."""
        return self._observed.copy(deep=True)

    @property
    def bases(self) -> Mapping[str, Any]:
        """Fitted bases of the confounder terms by term name (a read-only mapping of immutable objects)."""
        return self._bases

    @property
    def design_matrix(self) -> pd.DataFrame:
        """The fitted design on the days used (rows by date, columns as :attr:`coef`; a copy).

        Kept so that diagnostics (leverage, influence, variance inflation) never need the data again.
        """
        if self._matrix is None:
            raise SpecificationError("this result was built without its design matrix; fit it with airhealth.fit.")
        return pd.DataFrame(self._matrix.copy(), index=self._fitted.index.copy(), columns=self._coef.index.copy())

    def working_weights(self) -> pd.Series:
        """IRLS working weights at the fit, ``μ`` for (quasi-)Poisson, ``μ / (1 + μ/θ)`` for negative binomial."""
        mu = self._fitted.to_numpy()
        w = family_of(self.spec.family, self.theta).working_weights(mu, np.ones_like(mu))
        return pd.Series(w, index=self._fitted.index.copy(), name="working_weight")

    def residuals(self, kind: ResidualKind = "deviance") -> pd.Series:
        """Residuals on the days used, indexed by date, as R's ``residuals(glm, type=kind)``.

        ``"response"``: ``y - μ``; ``"pearson"``: ``(y - μ) / sqrt(V(μ))`` (not divided by the dispersion);
        ``"deviance"``: ``sign(y - μ) sqrt(d(y, μ))`` with ``d`` the family's unit deviance.

        References
        ----------
        McCullagh P, Nelder JA (1989). *Generalized Linear Models*, 2nd ed., section 2.4.
        """
        check_choice("kind", kind, ResidualKind)
        y, mu = self._observed.to_numpy(dtype=float), self._fitted.to_numpy()
        family = family_of(self.spec.family, self.theta)
        if kind == "response":
            values = y - mu
        elif kind == "pearson":
            values = (y - mu) / np.sqrt(family.variance(mu))
        else:
            values = np.sign(y - mu) * np.sqrt(np.maximum(family.unit_deviance(y, mu), 0.0))
        return pd.Series(values, index=self._fitted.index.copy(), name=f"{kind}_residual")

    # -- the exposure term -------------------------------------------------------------------------
    @property
    def std_err(self) -> pd.Series:
        """Standard errors of all coefficients."""
        return pd.Series(np.sqrt(np.diag(self._cov.to_numpy())), index=self._coef.index.copy(), name="std_err")

    def _exposure_block(self) -> tuple[np.ndarray, np.ndarray]:
        if self.groups:
            raise SpecificationError(
                f"the exposure effect of this fit differs by level of {self.spec.modifier!r} "
                f"({', '.join(map(str, self.groups))}): use result.effects_by_group(per=10) and "
                "result.modification_test()."
            )
        at = self._coef.index.get_indexer(list(self.exposure_columns))  # positions: no label look-ups per call
        return self._coef.to_numpy()[at], self._cov.to_numpy()[np.ix_(at, at)]  # fancy indexing copies

    @property
    def lag_basis(self) -> np.ndarray:
        return self.spec.lag.basis()

    @property
    def exposure_coef(self) -> float:
        """Cumulative log-RR per exposure unit (the single coefficient for a single lag or mean)."""
        theta, _ = self._exposure_block()
        return float(self.lag_basis.sum(axis=0) @ theta)

    @property
    def exposure_se(self) -> float:
        """Standard error of :attr:`exposure_coef`."""
        _, v = self._exposure_block()
        w = self.lag_basis.sum(axis=0)
        return float(np.sqrt(w @ v @ w))

    def lag_coefficients(self) -> pd.DataFrame:
        """Per-lag log-RR per unit, ``C θ``, with SEs from ``C V Cᵀ`` (one row per lag day)."""
        theta, v = self._exposure_block()
        c = self.lag_basis
        return pd.DataFrame(
            {"lag": self.spec.lag.lags, "coef": c @ theta, "se": np.sqrt(np.einsum("ij,jk,ik->i", c, v, c))}
        )

    def _per(self, per: float | None, scale: EffectScale) -> tuple[float, str]:
        check_choice("scale", scale, EffectScale)
        if scale == "iqr":
            if per is not None:
                raise SpecificationError("give either per=... or scale='iqr', not both.")
            return self.exposure_iqr, f"IQR ({self.exposure_iqr:.3g} {self.spec.unit})"
        amount = 10.0 if per is None else float(per)
        return amount, f"{amount:g} {self.spec.unit}"

    def effect(self, per: float | None = None, scale: EffectScale = "unit", level: float = 0.95) -> Any:
        """Relative risk for an exposure increase of ``per`` units (default 10), or one IQR with ``scale="iqr"``.

        The IQR is that of the daily exposure over the days used, the same for every lag structure.

        Returns an :class:`~airhealth.model.effects.Effect` with ``rr``, ``rr_low``, ``rr_high``,
        ``percent_change`` and ``p_value``; for distributed lags it is the cumulative effect.

        Examples
        --------
        >>> import airhealth
        >>> result = airhealth.fit(airhealth.load_sample(), outcome="deaths_all", exposure="pm25",
        ...                        temperature="temperature")
        >>> round(result.effect(per=10).rr, 3)  # doctest: +SKIP
        1.01
        """
        amount, label = self._per(per, scale)
        return relative_risk(
            self.exposure_coef,
            self.exposure_se,
            per=amount,
            level=level,
            exposure=self.spec.exposure,
            lag=self.spec.lag.label,
            per_label=label,
        )

    def lag_effects(self, per: float = 10.0, level: float = 0.95) -> pd.DataFrame:
        """Per-lag relative risks for an increase of ``per`` units (``lag, coef, se, rr, rr_low, rr_high``)."""
        rows = []
        for lag, coef, se in self.lag_coefficients().itertuples(index=False):
            e = relative_risk(coef, se, per=per, level=level)
            rows.append(
                {
                    "lag": int(lag),
                    "coef": coef,
                    "se": se,
                    "rr": e.rr,
                    "rr_low": e.rr_low,
                    "rr_high": e.rr_high,
                }
            )
        return pd.DataFrame(rows)

    # -- co-pollutants and effect modification (model/group_effects.py) ---------------------------
    def copollutant_effects(self, per: float = 10.0, level: float = 0.95) -> pd.DataFrame:
        """Each co-pollutant's effect per ``per`` units, adjusted for the exposure, with its correlation
        with the exposure on the days used (one row per co-pollutant; empty without co-pollutants)."""
        return copollutant_effects(self, per=per, level=level)

    def effects_by_group(self, per: float = 10.0, level: float = 0.95) -> pd.DataFrame:
        """The exposure's effect in each level of the modifier (``group, coef, se, rr, rr_low, rr_high,
        p_value, n_days, events``); for a distributed lag, the cumulative effect in each level."""
        return effects_by_group(self, per=per, level=level)

    def modification_test(self) -> pd.Series:
        """Wald test of equal exposure effects across the modifier's levels (``statistic``, ``df``,
        ``p_value``; chi-square on levels − 1 df with the fit's covariance, see
        :mod:`airhealth.model.group_effects`)."""
        return modification_test(self)

    def _group_codes(self) -> np.ndarray:
        return np.zeros(self.n_days, dtype=int) if self._codes is None else self._codes.copy()

    # -- views -------------------------------------------------------------------------------------
    def to_dict(self, per: float = 10.0, level: float = 0.95) -> dict[str, Any]:
        """The JSON record of the command line: effect, fit statistics and, for distributed lags, per lag.

        With co-pollutants it gains ``copollutants`` (one record per co-pollutant); with a modifier the
        single-effect keys are None and it gains ``modifier``, ``groups`` and ``modification_test``.
        """
        keys = ("coef", "se", "rr", "rr_low", "rr_high", "percent_change", "p_value")
        if self.groups:
            e, effect = None, dict.fromkeys(keys)
        else:
            e = self.effect(per=per, level=level)
            effect = {k: getattr(e, k) for k in keys}
        out: dict[str, Any] = {
            "outcome": self.spec.outcome,
            "exposure": self.spec.exposure,
            "lag": self.spec.lag.label,
            "per": float(per) if e is None else e.per,
            "unit": self.spec.unit,
            **effect,
            "dispersion": self.dispersion,
            "qaic": self.qaic,
            "exposure_iqr": self.exposure_iqr,
            "deviance": self.deviance,
            "df_resid": self.df_resid,
            "n_days": self.n_days,
            "n_dropped": len(self._dropped),
            "family": self.spec.family,
            "converged": self.converged,
            "level": level,
            "aliased": list(self.aliased),
            "notes": list(self.notes),
            "interval": self.spec.interval_used,
            "design": self.spec.design,
        }
        out.update(self.strata or {})  # a case-crossover: n_strata, n_strata_without_events, n_strata_single_day
        if self.hac_lags is not None:
            out["hac_lags"] = self.hac_lags
        if self.spec.residual_lags:
            out["residual_lags"] = self.spec.residual_lags
        if self.theta is not None:
            out["theta"] = self.theta
        if self.spec.lag.is_distributed and not self.groups:
            out["lags"] = self.lag_effects(per=per, level=level).to_dict(orient="records")
            out["cumulative"] = {k: out[k] for k in ("coef", "se", "rr", "rr_low", "rr_high")}
        out.update(extra_record(self, per, level))
        return out

    def summary(self, per: float = 10.0, level: float = 0.95) -> pd.DataFrame:
        """One-row tidy table of the exposure effect and fit statistics."""
        d = self.to_dict(per=per, level=level)
        return pd.DataFrame([{k: d[k] for k in SUMMARY_COLUMNS}])

    def drop_summary(self) -> pd.Series:
        """Number of calendar days dropped for each reason."""
        return self._dropped["reason"].value_counts().rename("days")

    def __repr__(self) -> str:
        if getattr(self.spec.lag, "is_nonlinear", False):  # no per-unit effect (exposure_lag.ExposureLagBasis)
            return (
                f"<FitResult {self.spec.outcome} ~ {self.spec.exposure} [{self.spec.lag.label}] "
                f"({self.spec.family}): non-linear exposure-response, dispersion {self.dispersion:.3f}, "
                f"{self.n_days} days>"
            )
        if self.groups:
            return (
                f"<FitResult {self.spec.outcome} ~ {self.spec.exposure} lag {self.spec.lag.label} by "
                f"{self.spec.modifier} ({', '.join(map(str, self.groups))}; {self.spec.family}): see "
                f"effects_by_group(), dispersion {self.dispersion:.3f}, {self.n_days} days>"
            )
        e = self.effect()
        return (
            f"<FitResult {self.spec.outcome} ~ {self.spec.exposure} lag {self.spec.lag.label} "
            f"({self.spec.family}): RR per 10 {self.spec.unit} = {e.rr:.4f} [{e.rr_low:.4f}, {e.rr_high:.4f}], "
            f"dispersion {self.dispersion:.3f}, {self.n_days} days>"
        )

    def _repr_html_(self) -> str | None:
        if self.groups:
            from ..report.modification_section import group_effects_html

            return group_effects_html(self)
        if getattr(self.spec.lag, "is_nonlinear", False):
            return None  # notebooks fall back to the text repr
        from ..report.tables import result_html

        return result_html(self)

    def plot_fit(self, ax: Any = None) -> Any:
        """Observed daily counts and fitted means over time; returns the Axes."""
        from ..report.plots import plot_observed_fitted

        return plot_observed_fitted(self, ax=ax)

    def plot_lags(self, per: float = 10.0, ax: Any = None) -> Any:
        """Per-lag relative risks with intervals; returns the Axes."""
        from ..report.plots import plot_lag_effects

        return plot_lag_effects(self, per=per, ax=ax)
