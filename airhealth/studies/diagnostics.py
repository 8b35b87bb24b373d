r"""Diagnostics of one fit: residual autocorrelation, dispersion, influential days, concurvity, a verdict.

Everything is computed from the :class:`~airhealth.model.result.FitResult` alone (its design matrix on the
days used, observed counts and fitted means); the data are never needed again.

Residual autocorrelation across gaps
------------------------------------
The deviance residuals are placed on the calendar from the first to the last day used; days not used are
missing. The autocorrelation at lag ``k`` is

.. math::

    r_k = \frac{\sum_{t,\,t+k\ \mathrm{used}} (e_t - \bar e)(e_{t+k} - \bar e)}
               {\sum_{t\ \mathrm{used}} (e_t - \bar e)^2},

so only pairs of days exactly ``k`` calendar days apart and both used contribute (``n_pairs`` in the table),
and the denominator is over all days used. Without gaps this is the usual (biased) sample autocorrelation
(R ``acf``, statsmodels ``acf``); with gaps it is statsmodels ``acf(..., missing="conservative")``. The
partial autocorrelations follow from these by the Durbin–Levinson recursion (R ``pacf``; statsmodels
``pacf(method="ldb")``). The band ``±1.96/√n`` is the approximate 95% limit for white noise (Box & Jenkins).

References
----------
Box GEP, Jenkins GM (1976). *Time Series Analysis: Forecasting and Control*, rev. ed. Holden-Day (sample
autocorrelations, the ``±2/√n`` band, at most ``n/4`` lags; from memory).
Cook RD (1977). Detection of influential observation in linear regression. Technometrics 19:15–18.
Williams DA (1987). Generalized linear model diagnostics using the deviance and single case deletions.
Appl Stat 36:181–191 (GLM leverage, Cook's distance and standardized residuals, as R ``influence.measures``).
Hoaglin DC, Welsch RE (1978). The hat matrix in regression and ANOVA. Am Stat 32:17–22 (leverage > 2p/n; from memory).
Bollen KA, Jackman RW (1990). Regression diagnostics: an expository treatment of outliers and influential
cases. In Fox & Long (eds), *Modern Methods of Data Analysis*, Sage (Cook's distance > 4/n; from memory).
Fox J, Monette G (1992). Generalized collinearity diagnostics. J Am Stat Assoc 87:178–183 (from memory).
Brumback BA, Ryan LM, Schwartz JD, Neas LM, Gold DR (2000). Transitional regression models, with application
to environmental time series. J Am Stat Assoc 95:16–27 (lagged residual terms).
Newey WK, West KD (1987). Econometrica 55:703–708 (autocorrelation-robust intervals).
"""

from __future__ import annotations

from dataclasses import FrozenInstanceError
from typing import Any

import numpy as np
import pandas as pd
from scipy import linalg

from .._threads import fitting_threads
from .._warn import warn_user
from ..errors import DataWarning, SpecificationError
from ..model.fitting import DISPERSION_WARN
from ..model.result import FitResult

__all__ = ["Diagnostics", "diagnose"]

#: Partial autocorrelations at these lags decide whether residual autocorrelation is material.
SHORT_LAGS = (1, 2, 3)
#: Outlying day: |standardized deviance residual| above this (common practice, no source: ~0.3% of days
#: under a normal approximation).
OUTLIER_LIMIT = 3.0
#: Concurvity warning when the (generalized) variance inflation of the exposure exceeds this; the usual rule
#: of thumb for a VIF (e.g. Kutner, Nachtsheim & Neter 2004, Applied Linear Regression Models; from memory).
VIF_WARN = 10.0
#: How many dates a verdict line names.
SHOWN_DATES = 5


def _autocorrelation(residuals: pd.Series, max_lag: int) -> pd.DataFrame:
    """Calendar-aware ACF, Durbin–Levinson PACF and pair counts of ``residuals`` (see the module notes)."""
    dates = pd.DatetimeIndex(residuals.index)
    position = ((dates - dates[0]) // pd.Timedelta(days=1)).to_numpy()
    values = residuals.to_numpy(dtype=float)
    centred = np.zeros(int(position[-1]) + 1)
    present = np.zeros(centred.size, dtype=bool)
    centred[position] = values - values.mean()
    present[position] = True
    c0 = float(centred @ centred)
    lags = np.arange(1, max_lag + 1)
    acf = np.array([centred[k:] @ centred[:-k] for k in lags]) / c0
    pairs = np.array([int(np.sum(present[k:] & present[:-k])) for k in lags])
    return pd.DataFrame({"lag": lags, "acf": acf, "pacf": _durbin_levinson(acf), "n_pairs": pairs})


def _durbin_levinson(acf: np.ndarray) -> np.ndarray:
    """Partial autocorrelations from autocorrelations ``r_1..r_m`` (Durbin–Levinson recursion)."""
    m = acf.size
    pacf = np.empty(m)
    phi = np.zeros(0)
    variance = 1.0
    for k in range(m):
        step = (acf[k] - phi @ acf[:k][::-1]) / variance if k else acf[0]
        phi = np.append(phi - step * phi[::-1], step)
        variance *= 1.0 - step * step
        pacf[k] = step
    return pacf


def _weighted_gram(result: FitResult) -> tuple[pd.DataFrame, np.ndarray, np.ndarray, np.ndarray]:
    """The design, ``√w``, the Cholesky factor ``L`` of ``Xᵀ W X`` and ``L⁻¹ (√w X)ᵀ`` (IRLS weights ``w``)."""
    x = result.design_matrix
    root_w = np.sqrt(result.working_weights().to_numpy())
    a = x.to_numpy() * root_w[:, None]
    chol = linalg.cholesky(a.T @ a, lower=True)
    return x, root_w, chol, linalg.solve_triangular(chol, a.T, lower=True)


def _influence(result: FitResult, x: pd.DataFrame, whitened: np.ndarray) -> pd.DataFrame:
    """Per-day leverage, Cook's distance and standardized deviance residual (as R ``influence.measures``).

    Leverage is the diagonal of the hat matrix ``√W X (Xᵀ W X)⁻¹ Xᵀ √W`` at the fit; Cook's distance
    ``(r_P / (1 - h))² h / (φ p)`` with Pearson residual ``r_P``, dispersion ``φ`` (1 for Poisson and negative
    binomial) and ``p`` coefficients; standardized residual ``r_D / √(φ (1 - h))`` (Williams 1987).
    """
    hat = np.einsum("ij,ij->j", whitened, whitened)
    p = x.shape[1]
    dispersion = result.dispersion if result.spec.family == "quasipoisson" else 1.0
    pearson = result.residuals("pearson").to_numpy()
    deviance = result.residuals("deviance").to_numpy()
    with np.errstate(divide="ignore", invalid="ignore"):
        cooks = (pearson / (1.0 - hat)) ** 2 * hat / (dispersion * p)
        standardized = deviance / np.sqrt(dispersion * (1.0 - hat))
    return pd.DataFrame(
        {
            "date": x.index,
            "observed": result.observed.to_numpy(),
            "fitted": result.fitted.to_numpy(),
            "deviance_residual": deviance,
            "standardized_residual": standardized,
            "leverage": hat,
            "cooks_distance": cooks,
        }
    )


def _exposure_vif(result: FitResult, x: pd.DataFrame, root_w: np.ndarray, chol: np.ndarray) -> float:
    """Generalized variance inflation of the exposure term against the confounders, per column.

    ``(det T / det R)^(1/k)`` for the ``k`` exposure columns, with ``T`` their centred and ``R`` their
    residual cross-products after weighted least squares on the confounders (IRLS weights of the fit);
    ``R⁻¹`` is the exposure block of ``(Xᵀ W X)⁻¹``. For one column this is the usual ``1 / (1 - R²)``
    (Fox & Monette 1992).
    """
    at = x.columns.get_indexer(list(result.exposure_columns))
    inverse = linalg.cho_solve((chol, True), np.eye(chol.shape[0]))
    e = x.to_numpy()[:, at] * root_w[:, None]
    centred = e - np.outer(root_w, (root_w @ e) / (root_w @ root_w))
    _, log_total = np.linalg.slogdet(centred.T @ centred)
    _, log_inverse = np.linalg.slogdet(inverse[np.ix_(at, at)])
    return float(np.exp((log_total + log_inverse) / len(at)))


def _dates(frame: pd.DataFrame, column: str) -> str:
    top = frame.sort_values(column, key=np.abs, ascending=False).head(SHOWN_DATES)
    shown = ", ".join(d.strftime("%Y-%m-%d") for d in top["date"])
    return shown + (" and others" if len(frame) > SHOWN_DATES else "")


class Diagnostics:
    """Diagnostics of one fit (read-only; tables are given out as copies). Build with :func:`diagnose`.

    Attributes
    ----------
    result : FitResult
        The fit diagnosed.
    max_lag : int
        Largest lag of the autocorrelation table.
    dispersion : float
        The fit's dispersion (Pearson χ² / residual df for quasi-Poisson).
    exposure_vif : float
        Variance inflation of the exposure term against the confounders (generalized, per column, for a
        distributed lag).
    band : float
        ``1.96 / √n``, the approximate 95% white-noise band of the autocorrelations.
    """

    __slots__ = ("_acf", "_influence", "_verdict", "band", "dispersion", "exposure_vif", "max_lag", "result")

    def __init__(self, result: FitResult, max_lag: int) -> None:
        put = object.__setattr__
        put(self, "result", result)
        put(self, "max_lag", max_lag)
        put(self, "dispersion", float(result.dispersion))
        put(self, "band", 1.96 / np.sqrt(result.n_days))
        put(self, "_acf", _autocorrelation(result.residuals("deviance"), max_lag))
        x, root_w, chol, whitened = _weighted_gram(result)
        put(self, "_influence", _influence(result, x, whitened))
        put(self, "exposure_vif", _exposure_vif(result, x, root_w, chol))
        put(self, "_verdict", _verdict(self))

    def __setattr__(self, name: str, value: Any) -> None:
        raise FrozenInstanceError(f"Diagnostics are read-only: {name!r} cannot be set; diagnose the fit again.")

    @property
    def autocorrelation(self) -> pd.DataFrame:
        """Deviance-residual autocorrelations: ``lag``, ``acf``, ``pacf``, ``n_pairs`` (a copy)."""
        return self._acf.copy(deep=True)

    @property
    def influence(self) -> pd.DataFrame:
        """Per day used: ``date, observed, fitted, deviance_residual, standardized_residual, leverage,
        cooks_distance`` (a copy)."""
        return self._influence.copy(deep=True)

    @property
    def influential_days(self) -> pd.DataFrame:
        """Days with Cook's distance above ``4/n`` (Bollen & Jackman 1990), largest first."""
        table = self._influence
        return table[table["cooks_distance"] > 4.0 / len(table)].sort_values("cooks_distance", ascending=False)

    @property
    def high_leverage_days(self) -> pd.DataFrame:
        """Days with leverage above ``2p/n`` (Hoaglin & Welsch 1978), largest first."""
        table, p = self._influence, len(self.result.coef)
        return table[table["leverage"] > 2.0 * p / len(table)].sort_values("leverage", ascending=False)

    @property
    def outlying_days(self) -> pd.DataFrame:
        """Days with ``|standardized deviance residual| > 3``, largest first."""
        table = self._influence
        out = table[table["standardized_residual"].abs() > OUTLIER_LIMIT]
        return out.sort_values("standardized_residual", key=np.abs, ascending=False)

    @property
    def verdict(self) -> pd.DataFrame:
        """Plain-language verdict: ``aspect``, ``status`` ("fine" or "check"), ``finding``, ``what_to_try``."""
        return self._verdict.copy(deep=True)

    def __repr__(self) -> str:
        lines = [f"<Diagnostics of {self.result!r}>"]
        lines += [f"  [{r.status}] {r.finding}" for r in self._verdict.itertuples()]
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        """Notebook view: verdict, dispersion and the largest autocorrelations (every text escaped)."""
        from ..report.diagnostics_view import diagnostics_html

        return diagnostics_html(self)

    def plot_autocorrelation(self, ax: Any = None) -> Any:
        """Residual ACF and PACF with the white-noise band; returns the Axes."""
        from ..report.diagnostic_plots import plot_residual_autocorrelation

        return plot_residual_autocorrelation(self, ax=ax)

    def plot_residuals_over_time(self, ax: Any = None) -> Any:
        """Deviance residuals against date; returns the Axes."""
        from ..report.diagnostic_plots import plot_residuals_over_time

        return plot_residuals_over_time(self.result, ax=ax)

    def plot_residuals_against(self, values: pd.Series, label: str | None = None, ax: Any = None) -> Any:
        """Deviance residuals against a daily series (e.g. temperature), matched by date; returns the Axes."""
        from ..report.diagnostic_plots import plot_residuals_against

        return plot_residuals_against(self.result, values, label=label, ax=ax)


def _autocorrelation_finding(diag: Diagnostics) -> dict[str, str]:
    short = diag._acf[diag._acf["lag"].isin(SHORT_LAGS)]
    worst = short.loc[short["pacf"].abs().idxmax()]
    text = (
        f"residual partial autocorrelation at lags 1-3 up to {worst['pacf']:+.3f} (lag {int(worst['lag'])}); "
        f"the white-noise band is ±{diag.band:.3f}"
    )
    if abs(worst["pacf"]) <= diag.band:
        return {"aspect": "autocorrelation", "status": "fine", "finding": text + ".", "what_to_try": ""}
    hac = (
        "the intervals already use Newey-West (HAC) standard errors"
        if diag.result.spec.interval == "hac"
        else "autocorrelation-robust intervals: fit again with interval='hac'"
    )
    try_ = f"more time df (trend_df_per_year above {diag.result.spec.trend_df_per_year:g}); lagged deviance "
    try_ += f"residuals as covariates (Brumback et al. 2000); {hac}"
    return {"aspect": "autocorrelation", "status": "check", "finding": text + ": intervals may be too narrow.",
            "what_to_try": try_}  # fmt: skip


def _worth_a_look(aspect: str, table: pd.DataFrame, n: int) -> bool:
    """Whether flagged days call for a look (the lists name them either way).

    Under a well-fitting model about 0.3% of days pass the outlier limit, so more than 1% is a sign; the 4/n
    and 2p/n rules flag a few per cent of days by construction, so an influential day is one whose Cook's
    distance exceeds 1 (Cook & Weisberg 1982, Residuals and Influence in Regression; from memory) and
    leverage calls for a look when more than 10% of days pass 2p/n (common practice, no source).
    """
    if aspect == "outlying days":
        return len(table) > 0.01 * n
    if aspect == "influential days":
        return bool((table["cooks_distance"] > 1.0).any())
    return len(table) > 0.10 * n


def _verdict(diag: Diagnostics) -> pd.DataFrame:
    """The plain-language findings, one row per aspect."""
    rows = [_autocorrelation_finding(diag)]
    fine = diag.dispersion <= DISPERSION_WARN or diag.result.spec.family != "quasipoisson"
    rows.append({
        "aspect": "dispersion", "status": "fine" if fine else "check",
        "finding": f"dispersion {diag.dispersion:.2f} (Pearson χ² / residual df).",
        "what_to_try": "" if fine else "look for outlying days, a missing confounder or a mis-coded outcome",
    })  # fmt: skip
    n = diag.result.n_days
    for aspect, table, column, rule in (
        ("outlying days", diag.outlying_days, "standardized_residual", "|standardized deviance residual| > 3"),
        ("influential days", diag.influential_days, "cooks_distance", "Cook's distance > 4/n"),
        ("leverage", diag.high_leverage_days, "leverage", "leverage > 2p/n"),
    ):
        status = "check" if _worth_a_look(aspect, table, n) else "fine"
        finding = f"{len(table)} of {n} days with {rule}" + (f": {_dates(table, column)}." if len(table) else ".")
        todo = (
            "check these dates for data errors or events (epidemics, heat waves); refit without them"
            if status == "check"
            else ""
        )
        rows.append({"aspect": aspect, "status": status, "finding": finding, "what_to_try": todo})
    vif_fine = diag.exposure_vif <= VIF_WARN
    rows.append({
        "aspect": "concurvity", "status": "fine" if vif_fine else "check",
        "finding": f"variance inflation of the exposure against the confounders {diag.exposure_vif:.2f} "
        f"(warning above {VIF_WARN:g}).",
        "what_to_try": "" if vif_fine else "the exposure is largely explained by time and weather terms; "
        "compare fewer time df and report the sensitivity of the estimate",
    })  # fmt: skip
    return pd.DataFrame(rows, columns=["aspect", "status", "finding", "what_to_try"])


def diagnose(result: FitResult, max_lag: int = 30) -> Diagnostics:
    """Diagnose a fit: residual autocorrelation, dispersion, influential days, concurvity and a verdict.

    Parameters
    ----------
    result : FitResult
        A fit from :func:`airhealth.fit` (it carries its design matrix).
    max_lag : int
        Largest lag of the autocorrelation table (default 30; at most a quarter of the days used).

    Returns
    -------
    Diagnostics
        With ``autocorrelation`` (``lag, acf, pacf, n_pairs``), ``dispersion``, ``influence`` (per day),
        ``influential_days``, ``outlying_days``, ``high_leverage_days``, ``exposure_vif``, ``verdict`` and
        figures.

    Warns
    -----
    DataWarning
        When the exposure's variance inflation against the confounders exceeds 10 (concurvity).

    Examples
    --------
    >>> import airhealth
    >>> result = airhealth.fit(airhealth.load_sample(), outcome="deaths_all", exposure="pm25",
    ...                        temperature="temperature")
    >>> checks = airhealth.diagnose(result, max_lag=10)
    >>> list(checks.autocorrelation.columns)
    ['lag', 'acf', 'pacf', 'n_pairs']
    """
    if not isinstance(result, FitResult):
        raise SpecificationError(f"diagnose needs a FitResult from airhealth.fit, got {type(result).__name__}.")
    if result.strata is not None:  # leverage and variance inflation here assume the design holds every column
        raise SpecificationError(
            "diagnose checks time-series fits; this is a case-crossover fit (its stratum intercepts are not "
            "in the design matrix). Diagnose the time-series fit of the same model (design='time-series')."
        )
    limit = result.n_days // 4
    if isinstance(max_lag, bool) or not isinstance(max_lag, int | np.integer) or not 1 <= max_lag <= limit:
        raise SpecificationError(
            f"max_lag={max_lag!r} must be a whole number from 1 to {limit} (a quarter of the {result.n_days} "
            "days used; longer lags rest on too few pairs of days)."
        )
    with fitting_threads(result.n_days, len(result.coef)):  # the fitting path's BLAS thread policy
        diag = Diagnostics(result, int(max_lag))
    if diag.exposure_vif > VIF_WARN:
        warn_user(
            f"the exposure {result.spec.exposure!r} has a variance inflation of {diag.exposure_vif:.1f} against "
            f"the confounders (above {VIF_WARN:g}): its estimate rests on little variation left after time and "
            "weather terms (concurvity); report how it changes with fewer time df.",
            DataWarning,
        )
    return diag
