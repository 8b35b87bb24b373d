r"""Univariate random-effects pooling of city estimates: ``airhealth.pool``.

See :mod:`airhealth.cities.heterogeneity` for the model and the estimators of :math:`\tau^2`, and
:mod:`airhealth.cities.pooled_result` for what the result reports.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any, Literal

import numpy as np
from scipy import stats

from .._choices import check_choice
from ..errors import SpecificationError
from ..model.effects import normal_quantile
from ._inputs import read_estimates
from .heterogeneity import cochran_q, tau2_dl, tau2_reml, typical_within_variance, weighted_fit
from .pooled_result import Heterogeneity, ModeratorTest, PooledEffect

__all__ = ["PoolingMethod", "pool"]

PoolingMethod = Literal["reml", "dl", "fixed"]

#: Relative risks are reported per this many exposure units unless ``per`` is given, as in ``FitResult.effect``.
DEFAULT_PER = 10.0


def pool(
    estimates: Any,
    estimate: str = "coef",
    se: str = "se",
    method: PoolingMethod = "reml",
    moderators: Sequence[str] | None = None,
    level: float = 0.95,
    per: float | None = None,
) -> PooledEffect:
    r"""Pool city estimates by random-effects (or fixed-effect) meta-analysis, optionally with moderators.

    Model: :math:`y_i = x_i^\top\beta + u_i + e_i`, :math:`u_i \sim N(0,\tau^2)`, :math:`e_i \sim N(0, v_i)`,
    :math:`v_i = \mathrm{SE}_i^2`; :math:`x_i` is 1 and the city's moderator values. :math:`\tau^2` is
    estimated by REML (Fisher scoring, Viechtbauer 2005), by the DerSimonian–Laird moment formula, or set
    to 0 (``"fixed"``). Intervals use the normal quantile (Wald z). The prediction interval for the effect
    in a new city is :math:`\hat\mu \pm z_{1-\alpha/2}\sqrt{\mathrm{SE}(\hat\mu)^2 + \hat\tau^2}` — Higgins,
    Thompson & Spiegelhalter (2009) propose a :math:`t_{k-2}` quantile instead; the normal quantile used here
    is the convention of R metafor's ``predict()`` with its default z tests, against which it is tested.

    Parameters
    ----------
    estimates : DataFrame
        One row per city: the estimate (log relative risk per exposure unit) and its standard error; an
        optional ``city`` column labels the rows; rows with a message in an ``error`` column (cities whose
        first-stage fit failed) are left out with a :class:`~airhealth.DataWarning`.
    estimate, se : str
        Column names of the estimate and of its standard error.
    method : {"reml", "dl", "fixed"}
        Estimator of the between-city variance.
    moderators : sequence of str, optional
        Numeric city-level columns for meta-regression; the result then tests them jointly (Wald ``QM``) and
        reports the residual heterogeneity ``Q_E``.
    level : float
        Confidence level of all intervals.
    per : float, optional
        Exposure increase for the relative risks, ``rr = exp(per * coef)``; default 10 units, as in
        :meth:`airhealth.FitResult.effect`. Give ``per=1`` when the estimates are already log relative risks
        of the contrast of interest.

    Returns
    -------
    PooledEffect

    Examples
    --------
    >>> import pandas as pd, airhealth
    >>> table = pd.DataFrame({"city": ["A", "B", "C"], "coef": [0.001, 0.002, 0.0004], "se": [4e-4, 5e-4, 6e-4]})
    >>> result = airhealth.pool(table, method="dl")
    >>> round(result.coef, 6), result.k
    (0.001164, 3)

    References
    ----------
    DerSimonian R, Laird N (1986). Meta-analysis in clinical trials. Control Clin Trials 7:177–188.
    Viechtbauer W (2005). Bias and efficiency of meta-analytic variance estimators in the random-effects
    model. J Educ Behav Stat 30:261–293.
    Higgins JPT, Thompson SG (2002). Quantifying heterogeneity in a meta-analysis. Stat Med 21:1539–1558.
    Higgins JPT, Thompson SG, Spiegelhalter DJ (2009). A re-evaluation of random-effects meta-analysis.
    J R Stat Soc A 172:137–159.
    """
    check_choice("method", method, PoolingMethod)
    z = normal_quantile(level)
    per = DEFAULT_PER if per is None else per
    if isinstance(per, bool) or not isinstance(per, int | float | np.number) or not np.isfinite(per) or per <= 0:
        raise SpecificationError(f"per must be a positive number of exposure units, got {per!r}.")
    data = read_estimates(estimates, estimate, se, moderators)
    y, v, X = data.y, data.v, data.X
    tau2_se = None
    if method == "reml":
        tau2, tau2_se, _ = tau2_reml(y, v, X)
    elif method == "dl":
        tau2 = tau2_dl(y, v, X)
    else:
        tau2 = 0.0
    fitted = weighted_fit(y, v, X, tau2)
    p = X.shape[1]
    heterogeneity = _heterogeneity(y, v, X, method, tau2, tau2_se)
    moderator_test = _moderator_test(fitted.coef, fitted.cov, data.terms) if p > 1 else None
    return PooledEffect(
        method=method,
        level=float(level),
        per=float(per),
        labels=data.labels,
        terms=data.terms,
        coefs=fitted.coef,
        cov=fitted.cov,
        heterogeneity=heterogeneity,
        moderator_test=moderator_test,
        estimates=y,
        variances=v,
        design=X,
        z=z,
        **pooled_lag_unit(estimates),
    )


def pooled_lag_unit(table: Any) -> dict[str, str | None]:
    """The ``lag`` and ``unit`` a :func:`airhealth.fit_cities` table records in its ``attrs`` (None if absent)."""
    attrs = getattr(table, "attrs", None) or {}
    return {k: (None if attrs.get(k) is None else str(attrs[k])) for k in ("lag", "unit")}


def _heterogeneity(
    y: np.ndarray, v: np.ndarray, X: np.ndarray, method: str, tau2: float, tau2_se: float | None
) -> Heterogeneity:
    """Q, its p-value, I² (percent) and H² (Higgins & Thompson 2002)."""
    k, p = X.shape
    df = k - p
    q = cochran_q(y, v, X)
    if method == "fixed":
        i2 = max(0.0, 100.0 * (q - df) / q) if q > 0 else 0.0
        h2 = q / df
    else:
        s2 = typical_within_variance(v, X)
        i2 = 100.0 * tau2 / (tau2 + s2)
        h2 = (tau2 + s2) / s2
    return Heterogeneity(tau2=float(tau2), tau2_se=tau2_se, q=q, q_df=df, q_p=float(stats.chi2.sf(q, df)), i2=i2, h2=h2)


def _moderator_test(coef: np.ndarray, cov: np.ndarray, terms: tuple[str, ...]) -> ModeratorTest:
    """Omnibus Wald test that every moderator coefficient (all but the intercept) is zero."""
    b = coef[1:]
    qm = float(b @ np.linalg.solve(cov[1:, 1:], b))
    df = len(b)
    return ModeratorTest(moderators=terms[1:], qm=qm, df=df, p=float(stats.chi2.sf(qm, df)))
