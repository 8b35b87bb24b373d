r"""Effects of a fit with co-pollutants or an effect modifier: per co-pollutant, per group, and the test of
equal group effects. :class:`~airhealth.model.result.FitResult` delegates its methods here.

For a lag structure with basis :math:`C` the cumulative effect of a term with coefficients :math:`\theta`
is :math:`w^\top\theta` with :math:`w = C^\top 1` (the single coefficient for a single day or a moving
average). With a modifier of :math:`G` levels the cumulative effects :math:`b = W\theta` (:math:`W` block
diagonal with :math:`w^\top` per level) have covariance :math:`V_b = W V W^\top`, and equal effects are
tested by the Wald statistic

.. math::

    X^2 = (D b)^\top (D V_b D^\top)^{-1} (D b), \qquad
    D = \begin{pmatrix} -1 & 1 & & \\ \vdots & & \ddots & \\ -1 & & & 1 \end{pmatrix}
    \in \mathbb{R}^{(G-1) \times G},

referred to a :math:`\chi^2_{G-1}` distribution. :math:`V` is the fit's covariance: scaled by the
estimated dispersion for quasi-Poisson, or the Newey–West sandwich with ``interval="hac"``. With
quasi-Poisson the dispersion is estimated, so an F test (:math:`X^2/(G-1)` on :math:`G-1` and the residual
df) is the small-sample alternative; with thousands of residual df the two p-values agree to about three
decimals, and we report the chi-square (as the relative risks' intervals use the normal distribution).

References
----------
Wald A (1943). Tests of statistical hypotheses concerning several parameters when the number of
observations is large. Trans Am Math Soc 54:426–482.
McCullagh P, Nelder JA (1989). *Generalized Linear Models*, 2nd ed., Chapman & Hall (quasi-likelihood).
Katsouyanni K, et al. (2001). Confounding and effect modification in the short-term effects of ambient
particles on total mortality. Epidemiology 12:521–531.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from scipy import stats

from ..errors import SpecificationError
from .effects import relative_risk

if TYPE_CHECKING:
    from .result import FitResult

__all__ = [
    "GROUP_COLUMNS",
    "copollutant_effects",
    "effects_by_group",
    "group_estimates",
    "modification_test",
    "require_one_effect",
]

#: Columns of :func:`effects_by_group` (the issue's contract, then the test's inputs).
GROUP_COLUMNS = ("group", "coef", "se", "rr", "rr_low", "rr_high", "p_value", "n_days", "events")


def _cumulative(result: FitResult, names: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """Positions of ``names`` in the coefficients and the weights ``w = C^T 1`` of the lag structure."""
    at = result._coef.index.get_indexer(names)
    if (at < 0).any():
        missing = [n for n, i in zip(names, at, strict=True) if i < 0]
        raise SpecificationError(f"the fit has no coefficient {missing[0]!r} (left out as aliased?).")
    return at, result.spec.lag.basis().sum(axis=0)


def copollutant_effects(result: FitResult, per: float = 10.0, level: float = 0.95) -> pd.DataFrame:
    """One row per co-pollutant: its cumulative effect at the exposure's lag structure, adjusted for the
    exposure (``copollutant, lag, per, unit, coef, se, rr, rr_low, rr_high, p_value, correlation``)."""
    spec = result.spec
    coef, cov = result._coef.to_numpy(), result._cov.to_numpy()
    rows = []
    for column, unit, r in zip(spec.copollutants, spec.copollutant_units, result.copollutant_correlations, strict=True):
        at, w = _cumulative(result, spec.lag.column_names(column))
        b, se = float(w @ coef[at]), float(np.sqrt(w @ cov[np.ix_(at, at)] @ w))
        e = relative_risk(b, se, per=per, level=level, exposure=column, lag=spec.lag.label)
        rows.append(
            {"copollutant": column, "lag": spec.lag.label, "per": float(per), "unit": unit, "coef": b, "se": se,
             "rr": e.rr, "rr_low": e.rr_low, "rr_high": e.rr_high, "p_value": e.p_value, "correlation": r}
        )  # fmt: skip
    columns = ["copollutant", "lag", "per", "unit", "coef", "se", "rr", "rr_low", "rr_high", "p_value", "correlation"]
    return pd.DataFrame(rows, columns=columns)


def require_one_effect(modifier: str | None, analysis: str) -> None:
    """Refuse an effect modifier in an analysis that uses one exposure effect (compare, sweep, sensitivity,
    burden, fit_cities): the one guard they all call before any work.

    Raises
    ------
    SpecificationError
        When ``modifier`` is set, naming the analysis and what to do instead.
    """
    if modifier is None:
        return
    raise SpecificationError(
        f"{analysis} needs one exposure effect, but modifier={modifier!r} gives one per group of {modifier!r}: "
        f"leave out modifier=..., or fit with airhealth.fit(..., modifier={modifier!r}) and read "
        "effects_by_group() (or run the analysis on each group's days)."
    )


def group_estimates(result: FitResult) -> tuple[np.ndarray, np.ndarray]:
    """Cumulative log-RR per unit in each group, ``b = W θ``, and their covariance ``W V Wᵀ``."""
    if not result.groups:
        raise SpecificationError("this fit has no effect modifier; fit with modifier='COLUMN' (e.g. 'season').")
    names = list(result.exposure_columns)
    at, w = _cumulative(result, names)
    m, n_groups = w.size, len(result.groups)
    big_w = np.kron(np.eye(n_groups), w[None, :])  # G × (G m): w on each level's block
    theta, v = result._coef.to_numpy()[at], result._cov.to_numpy()[np.ix_(at, at)]
    assert big_w.shape[1] == m * n_groups == theta.size
    return big_w @ theta, big_w @ v @ big_w.T


def effects_by_group(result: FitResult, per: float = 10.0, level: float = 0.95) -> pd.DataFrame:
    """One row per level of the modifier (see :data:`GROUP_COLUMNS`): the exposure's cumulative effect in it,
    with the days used and events in that level."""
    b, vb = group_estimates(result)
    codes = result._group_codes()
    y = result._observed.to_numpy()
    rows = []
    for g, group in enumerate(result.groups):
        se = float(np.sqrt(vb[g, g]))
        e = relative_risk(
            float(b[g]), se, per=per, level=level, exposure=result.spec.exposure, lag=result.spec.lag.label
        )
        rows.append(
            {"group": group, "coef": e.coef, "se": se, "rr": e.rr, "rr_low": e.rr_low, "rr_high": e.rr_high,
             "p_value": e.p_value, "n_days": int((codes == g).sum()), "events": float(y[codes == g].sum())}
        )  # fmt: skip
    return pd.DataFrame(rows, columns=list(GROUP_COLUMNS))


def modification_test(result: FitResult) -> pd.Series:
    """Wald test that the exposure's cumulative effect is equal in every group (module text): ``statistic``,
    ``df``, ``p_value``, and ``test`` (``"wald chi-square"``)."""
    b, vb = group_estimates(result)
    n = b.size
    d = np.hstack([-np.ones((n - 1, 1)), np.eye(n - 1)])
    diff = d @ b
    statistic = float(diff @ np.linalg.solve(d @ vb @ d.T, diff))
    return pd.Series(
        {
            "statistic": statistic,
            "df": n - 1,
            "p_value": float(stats.chi2.sf(statistic, n - 1)),
            "test": "wald chi-square",
        },
        name="modification_test",
        dtype=object,
    )


def extra_record(result: FitResult, per: float, level: float) -> dict[str, Any]:
    """The keys :meth:`FitResult.to_dict` gains with co-pollutants (``copollutants``) and a modifier
    (``modifier``, ``groups``, ``modification_test``)."""
    out: dict[str, Any] = {}
    if result.spec.copollutants:
        out["copollutants"] = copollutant_effects(result, per=per, level=level).to_dict(orient="records")
    if result.groups:
        test = modification_test(result)
        out["modifier"] = result.spec.modifier
        groups = effects_by_group(result, per=per, level=level).drop(columns="events")  # no unsuppressed counts
        out["groups"] = groups.to_dict(orient="records")
        out["modification_test"] = {k: test[k] for k in ("statistic", "df", "p_value", "test")}
    return out
