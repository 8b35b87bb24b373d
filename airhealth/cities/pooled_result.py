r"""The result of :func:`airhealth.pool`: pooled estimate, heterogeneity, moderator test and city predictions.

Best linear unbiased predictions (shrunken city estimates) follow the empirical Bayes formula with
:math:`\lambda_i = \hat\tau^2 / (\hat\tau^2 + v_i)`:
:math:`\tilde\theta_i = \lambda_i y_i + (1 - \lambda_i) x_i^\top\hat\beta`, with variance
:math:`\lambda_i v_i + (1-\lambda_i)^2 x_i^\top \mathrm{Cov}(\hat\beta) x_i` (the conditional variance given
:math:`\beta` plus the uncertainty of :math:`\hat\beta`; Raudenbush & Bryk 1985), as R metafor's ``blup()``.

References
----------
Raudenbush SW, Bryk AS (1985). Empirical Bayes meta-analysis. J Educ Stat 10:75–98.
Higgins JPT, Thompson SG, Spiegelhalter DJ (2009). A re-evaluation of random-effects meta-analysis.
J R Stat Soc A 172:137–159.
"""

from __future__ import annotations

import html
from collections.abc import Mapping
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np
import pandas as pd
from scipy import special

from ..errors import SpecificationError
from ..model.effects import relative_risk

__all__ = ["Heterogeneity", "ModeratorTest", "PooledEffect"]


@dataclass(frozen=True)
class Heterogeneity:
    """Between-city variance and Cochran's Q (residual ``Q_E`` when there are moderators); I² in percent."""

    tau2: float
    tau2_se: float | None
    q: float
    q_df: int
    q_p: float
    i2: float
    h2: float


@dataclass(frozen=True)
class ModeratorTest:
    """Omnibus Wald test of the moderators: ``QM`` on ``df`` degrees of freedom (chi-squared)."""

    moderators: tuple[str, ...]
    qm: float
    df: int
    p: float


def _frozen(a: np.ndarray) -> np.ndarray:
    out = np.array(a, dtype=float, copy=True)
    out.setflags(write=False)
    return out


@dataclass(frozen=True, eq=False)
class PooledEffect:
    """Pooled city estimates (read-only). Build it with :func:`airhealth.pool`.

    ``coef``/``se`` are the pooled estimate (the intercept when there are moderators: the effect where every
    moderator is 0); ``rr``/``rr_low``/``rr_high`` are ``exp(per * ...)``. ``table()`` gives every coefficient,
    ``summary()`` one tidy row, ``blup()`` the shrunken city estimates. ``lag`` and ``unit`` are those the
    cities were fitted with when the estimates came from :func:`airhealth.fit_cities` (its table's ``attrs``),
    else None.
    """

    method: str
    level: float
    per: float
    labels: tuple[str, ...]
    terms: tuple[str, ...]
    coefs: np.ndarray
    cov: np.ndarray
    heterogeneity: Heterogeneity
    moderator_test: ModeratorTest | None
    estimates: np.ndarray
    variances: np.ndarray
    design: np.ndarray
    z: float
    lag: str | None = None
    unit: str | None = None

    def __post_init__(self) -> None:
        for name in ("coefs", "cov", "estimates", "variances", "design"):
            object.__setattr__(self, name, _frozen(getattr(self, name)))

    # -- the pooled estimate -------------------------------------------------------------------------------
    @property
    def k(self) -> int:
        """Number of cities pooled."""
        return len(self.estimates)

    @property
    def coef(self) -> float:
        return float(self.coefs[0])

    @property
    def se(self) -> float:
        return float(np.sqrt(self.cov[0, 0]))

    @property
    def ci(self) -> tuple[float, float]:
        return self.coef - self.z * self.se, self.coef + self.z * self.se

    @property
    def tau2(self) -> float:
        return self.heterogeneity.tau2

    @property
    def i2(self) -> float:
        return self.heterogeneity.i2

    @property
    def prediction_interval(self) -> tuple[float, float]:
        """Interval for the true effect in a new city (at moderators 0): ``coef ± z sqrt(se² + tau²)``."""
        half = self.z * float(np.sqrt(self.se**2 + self.tau2))
        return self.coef - half, self.coef + half

    def predict(self, moderators: Mapping[str, Any] | pd.DataFrame | None = None) -> pd.DataFrame:
        r"""The pooled effect at given moderator values, with confidence and prediction intervals.

        For moderator values :math:`x` (with the intercept): :math:`x^\top\hat\beta`, SE
        :math:`\sqrt{x^\top \mathrm{Cov}(\hat\beta) x}`, and the prediction interval
        :math:`x^\top\hat\beta \pm z\sqrt{\mathrm{SE}^2 + \hat\tau^2}` (normal quantile, as R metafor's
        ``predict()``). ``moderators`` maps each moderator name to one value or a sequence of values (or is a
        DataFrame with those columns); without moderators in the model, leave it out.

        Raises
        ------
        SpecificationError
            A moderator of the model is missing, an unknown name is given, or a value is not a finite number.
        """
        names = self.terms[1:]
        frame = _moderator_frame(moderators)
        missing = [n for n in names if n not in frame.columns]
        unknown = [c for c in frame.columns if c not in names]
        if missing or unknown:
            raise SpecificationError(
                f"predict needs a value for every moderator of the model {list(names)}; "
                f"missing {missing}, not in the model {unknown}."
            )
        values = frame[list(names)].apply(pd.to_numeric, errors="coerce").to_numpy(dtype=float)
        if not np.isfinite(values).all():
            raise SpecificationError(f"moderator values for predict must be finite numbers, got {moderators!r}.")
        X = np.column_stack([np.ones(len(frame)), values])
        pred = X @ self.coefs
        se = np.sqrt(np.einsum("ij,jk,ik->i", X, self.cov, X))
        half = self.z * np.sqrt(se**2 + self.tau2)
        out = pd.DataFrame(values, columns=list(names))
        out["coef"], out["se"] = pred, se
        out["ci_low"], out["ci_high"] = pred - self.z * se, pred + self.z * se
        out["pi_low"], out["pi_high"] = pred - half, pred + half
        out["rr"] = np.exp(self.per * pred)
        out["rr_low"], out["rr_high"] = np.exp(self.per * out["ci_low"]), np.exp(self.per * out["ci_high"])
        return out

    def effect(self) -> Any:
        """The pooled relative risk per ``per`` units (an :class:`airhealth.model.effects.Effect`)."""
        return relative_risk(self.coef, self.se, per=self.per, level=self.level, exposure="pooled", lag="")

    # -- tables --------------------------------------------------------------------------------------------
    def table(self) -> pd.DataFrame:
        """One row per coefficient (intercept and moderators): estimate, SE, z, p, interval, relative risk."""
        se = np.sqrt(np.diag(self.cov))
        b = self.coefs
        zval = b / se
        return pd.DataFrame(
            {
                "term": list(self.terms),
                "coef": b,
                "se": se,
                "z": zval,
                "p_value": 2 * special.ndtr(-np.abs(zval)),
                "ci_low": b - self.z * se,
                "ci_high": b + self.z * se,
                "rr": np.exp(self.per * b),
                "rr_low": np.exp(self.per * (b - self.z * se)),
                "rr_high": np.exp(self.per * (b + self.z * se)),
            }
        )

    def to_dict(self) -> dict[str, Any]:
        """Plain values: pooled estimate, relative risk per ``per`` units, heterogeneity, moderator test."""
        e = self.effect()
        pi_low, pi_high = self.prediction_interval
        h = self.heterogeneity
        out: dict[str, Any] = {
            "method": self.method,
            "k": self.k,
            "coef": self.coef,
            "se": self.se,
            "ci_low": self.ci[0],
            "ci_high": self.ci[1],
            "p_value": e.p_value,
            "per": self.per,
            "level": self.level,
            "rr": e.rr,
            "rr_low": e.rr_low,
            "rr_high": e.rr_high,
            "pi_low": pi_low,
            "pi_high": pi_high,
            "rr_pi_low": float(np.exp(self.per * pi_low)),
            "rr_pi_high": float(np.exp(self.per * pi_high)),
            **{key: value for key, value in asdict(h).items()},
        }
        if self.moderator_test is not None:
            m = self.moderator_test
            out.update(
                moderators=list(m.moderators),
                qm=m.qm,
                qm_df=m.df,
                qm_p=m.p,
                coefficients={t: float(c) for t, c in zip(self.terms, self.coefs, strict=True)},
            )
        return out

    def summary(self) -> pd.DataFrame:
        """One tidy row: pooled estimate, relative risk, prediction interval and heterogeneity."""
        d = self.to_dict()
        d.pop("coefficients", None)
        if "moderators" in d:
            d["moderators"] = ", ".join(d["moderators"])
        return pd.DataFrame([d])

    def weights(self) -> pd.Series:
        """Each city's weight in the fit, percent: ``1/(v_i + tau²)`` normalised to sum to 100."""
        w = 1.0 / (self.variances + self.tau2)
        return pd.Series(100 * w / w.sum(), index=list(self.labels), name="weight_percent")

    def blup(self) -> pd.DataFrame:
        """Shrunken city estimates (best linear unbiased predictions) with SEs and intervals, one row per city."""
        lam = self.tau2 / (self.tau2 + self.variances)
        fitted = self.design @ self.coefs
        pred = lam * self.estimates + (1 - lam) * fitted
        xvx = np.einsum("ij,jk,ik->i", self.design, self.cov, self.design)
        se = np.sqrt(lam * self.variances + (1 - lam) ** 2 * xvx)
        return pd.DataFrame(
            {
                "city": list(self.labels),
                "estimate": self.estimates,
                "se": np.sqrt(self.variances),
                "weight_percent": self.weights().to_numpy(),
                "blup": pred,
                "blup_se": se,
                "blup_low": pred - self.z * se,
                "blup_high": pred + self.z * se,
            }
        )

    # -- display -------------------------------------------------------------------------------------------
    def __repr__(self) -> str:
        d = self.to_dict()
        return (
            f"PooledEffect({self.method}, k={self.k}: RR per {self.per:g} = {d['rr']:.4f} "
            f"({round(100 * self.level)}% CI {d['rr_low']:.4f}–{d['rr_high']:.4f}), "
            f"tau²={self.tau2:.3g}, I²={self.i2:.1f}%, Q={d['q']:.3g} (p={d['q_p']:.3g}))"
        )

    def _repr_html_(self) -> str:
        row = self.summary().iloc[0]
        cells = "".join(
            f"<tr><th>{html.escape(str(key))}</th><td>{html.escape(_fmt(value))}</td></tr>"
            for key, value in row.items()
        )
        return f"<table><caption>Pooled estimate ({html.escape(self.method)})</caption>{cells}</table>"


def _moderator_frame(moderators: Mapping[str, Any] | pd.DataFrame | None) -> pd.DataFrame:
    """Moderator values for predict as a frame: one row per point (one row when no moderators)."""
    if isinstance(moderators, pd.DataFrame):
        return moderators.reset_index(drop=True)
    if moderators is None:
        moderators = {}
    if not isinstance(moderators, Mapping):
        raise SpecificationError(
            f"moderators for predict must be a mapping of name to values or a DataFrame, got {moderators!r}."
        )
    columns = {str(k): np.atleast_1d(np.asarray(v, dtype=object)) for k, v in moderators.items()}
    lengths = {len(c) for c in columns.values()}
    if len(lengths) > 1:
        raise SpecificationError(f"moderator values for predict have different lengths: {moderators!r}.")
    return pd.DataFrame(columns, index=range(lengths.pop() if lengths else 1))


def _fmt(value: Any) -> str:
    if isinstance(value, float | np.floating):
        return f"{value:.6g}"
    return str(value)
