"""The result of :func:`airhealth.pool_multivariate` (formulas in :mod:`airhealth.cities.multivariate`)."""

from __future__ import annotations

import html
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from ..model.effects import normal_quantile

__all__ = ["CityPredictions", "MultivariatePooled"]


def _frozen(a: np.ndarray) -> np.ndarray:
    out = np.array(a, dtype=float, copy=True)
    out.setflags(write=False)
    return out


@dataclass(frozen=True, eq=False)
class CityPredictions:
    """Shrunken city vectors (BLUPs): ``coef`` (cities × coefficients), ``se`` and ``cov`` (k × p × p)."""

    coef: pd.DataFrame
    se: pd.DataFrame
    cov: np.ndarray


@dataclass(frozen=True, eq=False)
class MultivariatePooled:
    """Pooled coefficient vector (read-only): ``coef``, ``cov``, ``between_cov``, ``q``/``q_df``/``q_p``."""

    method: str
    names: tuple[str, ...]
    labels: tuple[str, ...]
    coef: np.ndarray
    cov: np.ndarray
    between_cov: np.ndarray
    q: float
    q_df: int
    q_p: float
    estimates: np.ndarray
    within: np.ndarray
    iterations: int
    lag: str | None = None
    unit: str | None = None

    def __post_init__(self) -> None:
        for name in ("coef", "cov", "between_cov", "estimates", "within"):
            object.__setattr__(self, name, _frozen(getattr(self, name)))

    @classmethod
    def build(
        cls,
        method: str,
        names: tuple[str, ...],
        labels: tuple[str, ...],
        estimates: np.ndarray,
        within: np.ndarray,
        between_cov: np.ndarray,
        iterations: int,
        lag: str | None = None,
        unit: str | None = None,
    ) -> MultivariatePooled:
        """Pooled vector and Q test for a given between-city covariance."""
        from .multivariate import q_test  # the estimators live there; this module only holds results

        Vinv = np.linalg.inv(within + between_cov)
        cov = np.linalg.inv(Vinv.sum(axis=0))
        coef = cov @ np.einsum("ijk,ik->j", Vinv, estimates)
        q, q_df, q_p = q_test(estimates, within)
        return cls(
            method=method,
            names=names,
            labels=labels,
            coef=coef,
            cov=(cov + cov.T) / 2,
            between_cov=between_cov,
            q=q,
            q_df=q_df,
            q_p=q_p,
            estimates=estimates,
            within=within,
            iterations=iterations,
            lag=lag,
            unit=unit,
        )

    @property
    def k(self) -> int:
        return self.estimates.shape[0]

    @property
    def se(self) -> np.ndarray:
        return np.sqrt(np.diag(self.cov))

    def table(self, level: float = 0.95) -> pd.DataFrame:
        """One row per coefficient: pooled estimate, SE, interval, and the between-city SD."""
        z = normal_quantile(level)
        return pd.DataFrame(
            {
                "term": list(self.names),
                "coef": self.coef,
                "se": self.se,
                "ci_low": self.coef - z * self.se,
                "ci_high": self.coef + z * self.se,
                "p_value": 2 * stats.norm.sf(np.abs(self.coef / self.se)),
                "between_sd": np.sqrt(np.diag(self.between_cov)),
            }
        )

    def blup(self) -> CityPredictions:
        """Best linear unbiased predictions of each city's vector, with their covariances."""
        p = len(self.coef)
        V = self.within + self.between_cov
        shrink = np.einsum("jk,ikl->ijl", self.between_cov, np.linalg.inv(V))  # Σ V_i^{-1}
        pred = self.coef + np.einsum("ijk,ik->ij", shrink, self.estimates - self.coef)
        rest = np.eye(p) - shrink
        cov = np.einsum("ijk,ikl->ijl", shrink, self.within) + np.einsum("ijk,kl,iml->ijm", rest, self.cov, rest)
        cov = (cov + np.transpose(cov, (0, 2, 1))) / 2
        se = np.sqrt(np.diagonal(cov, axis1=1, axis2=2))
        index = pd.Index(list(self.labels), name="city")
        columns = list(self.names)
        return CityPredictions(
            coef=pd.DataFrame(pred, index=index, columns=columns),
            se=pd.DataFrame(se, index=index, columns=columns),
            cov=_frozen(cov),
        )

    def to_dict(self) -> dict[str, Any]:
        return {
            "method": self.method,
            "k": self.k,
            "names": list(self.names),
            "coef": self.coef.tolist(),
            "se": self.se.tolist(),
            "cov": self.cov.tolist(),
            "between_cov": self.between_cov.tolist(),
            "q": self.q,
            "q_df": self.q_df,
            "q_p": self.q_p,
        }

    def __repr__(self) -> str:
        return (
            f"MultivariatePooled({self.method}, k={self.k}, p={len(self.coef)}, "
            f"Q={self.q:.3g} on {self.q_df} df (p={self.q_p:.3g}))"
        )

    def _repr_html_(self) -> str:
        table = self.table()
        head = "".join(f"<th>{html.escape(c)}</th>" for c in table.columns)
        body = "".join(
            "<tr>" + "".join(f"<td>{html.escape(v if isinstance(v, str) else f'{v:.6g}')}</td>" for v in row) + "</tr>"
            for row in table.itertuples(index=False)
        )
        return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"
