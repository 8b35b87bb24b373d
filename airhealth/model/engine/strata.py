r"""Stratum intercepts eliminated from a Poisson log-link fit: profiling and weighted demeaning.

A Poisson model with one free intercept per stratum,

.. math::

    \log \mu_i = \alpha_{s(i)} + x_i^\top \beta + o_i ,

has, for fixed :math:`\beta`, the closed-form maximum-likelihood intercepts

.. math::

    \hat\alpha_s(\beta) = \log \sum_{i \in s} w_i y_i - \log \sum_{i \in s} w_i \exp(x_i^\top \beta + o_i) ,

so the stratum totals are sufficient and the profile likelihood in :math:`\beta` is the conditional
(multinomial) likelihood of the counts given their stratum totals. Newton steps on it use the information
:math:`\tilde X^\top W \tilde X`, where :math:`\tilde X` is :math:`X` minus its stratum means weighted by
:math:`W = \mathrm{diag}(w\mu)` (Frisch–Waugh–Lovell: the :math:`\beta` block of the inverse information
of the model with indicator columns), and the score :math:`X^\top (y - \mu)`, which at the profiled
intercepts equals :math:`\tilde X^\top (y - \mu)` because every stratum's residuals sum to zero. The IRLS
engine (:mod:`airhealth.model.engine.irls`) uses these pieces when it is given strata; nothing else changes.

References
----------
Armstrong BG, Gasparrini A, Tobias A (2014). Conditional Poisson models: a flexible alternative to
conditional logistic case cross-over analysis. BMC Med Res Methodol 14:122.
Frisch R, Waugh FV (1933). Partial time regressions as compared with individual trends. Econometrica
1:387–401; Lovell MC (1963). Seasonal adjustment of economic time series and multiple regression analysis.
J Am Stat Assoc 58:993–1010. (Both from memory.)
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from ...errors import FitError
from .checks import RANK_TOL
from .core import layout, workspace

__all__ = ["StratumIndex", "checked_strata", "within_strata"]


@dataclass(frozen=True)
class StratumIndex:
    """The stratum of each row as dense codes ``0 .. n_strata - 1`` (every code used).

    Parameters
    ----------
    codes : ndarray of int
        Stratum of each row of the design.
    """

    codes: np.ndarray

    def __post_init__(self) -> None:
        codes = np.asarray(self.codes)
        if codes.ndim != 1 or codes.size == 0 or codes.dtype.kind not in "iu" or codes.min() < 0:
            raise FitError("strata must be a non-empty vector of whole-number stratum codes >= 0.")
        dense = np.unique(codes, return_inverse=True)[1].reshape(-1).astype(np.intp)
        dense.setflags(write=False)
        object.__setattr__(self, "codes", dense)

    @property
    def n_strata(self) -> int:
        return int(self.codes.max()) + 1

    def totals(self, values: np.ndarray) -> np.ndarray:
        """Sum of ``values`` within each stratum."""
        return np.bincount(self.codes, weights=values, minlength=self.n_strata)

    def profile(self, eta: np.ndarray, y: np.ndarray, w: np.ndarray) -> np.ndarray:
        """``eta`` with each stratum shifted by the intercept that maximises the Poisson likelihood.

        The shift is ``log(Σ w y) - log(Σ w exp(eta))`` within the stratum, computed after subtracting the
        stratum's largest ``eta`` so that no exponential overflows. Invariant to any shift of ``eta`` that
        is constant within strata.
        """
        top = np.full(self.n_strata, -np.inf)
        np.maximum.at(top, self.codes, eta)
        with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
            shifted = eta - top[self.codes]
            log_total = np.log(self.totals(w * y)) - np.log(self.totals(w * np.exp(shifted)))
            return shifted + log_total[self.codes]

    def demean(self, X: np.ndarray, weights: np.ndarray, out: np.ndarray) -> np.ndarray:
        """``X`` minus its ``weights``-weighted stratum means, written into ``out`` (same shape)."""
        total = self.totals(weights)
        safe = np.where(total > 0, total, 1.0)
        for j in range(X.shape[1]):
            means = self.totals(weights * X[:, j]) / safe
            np.subtract(X[:, j], means[self.codes], out=out[:, j])
        return out

    def null_means(self, offset: np.ndarray, y: np.ndarray, w: np.ndarray) -> np.ndarray:
        """Fitted means of the model with the stratum intercepts (and the offset) only."""
        return np.exp(self.profile(offset, y, w))


def checked_strata(
    strata: Any, shape: tuple[int, int], y: np.ndarray, w: np.ndarray, family: str
) -> StratumIndex | None:
    """The strata as a :class:`StratumIndex` (None without strata), checked against the design."""
    if strata is None:
        return None
    if family == "negbin":
        raise FitError("strata (eliminated stratum intercepts) apply to Poisson and quasi-Poisson fits only.")
    codes = strata.codes if isinstance(strata, StratumIndex) else np.asarray(strata)
    if codes.shape != (shape[0],):
        raise FitError(f"strata has shape {codes.shape} but the design matrix has {shape[0]} rows.")
    index = strata if isinstance(strata, StratumIndex) else StratumIndex(codes)
    empty = np.flatnonzero(index.totals(w * y) <= 0)
    if empty.size:  # the stratum's intercept would be minus infinity; it carries no information on beta
        rows = np.flatnonzero(np.isin(index.codes, empty))[:3].tolist()
        raise FitError(
            f"{empty.size} strata have no events (e.g. the stratum of rows {rows}); they carry no information "
            "on the coefficients: leave their rows out."
        )
    if float(w.sum()) <= shape[1] + index.n_strata:
        raise FitError(
            f"The model has {shape[1]} coefficients and {index.n_strata} strata but only {w.sum():g} rows; "
            "it needs more rows than coefficients plus strata."
        )
    return index


def within_strata(
    X: np.ndarray, ww: np.ndarray, strata: StratumIndex | None, names: Sequence[str] | None
) -> np.ndarray:
    """``X`` itself, or with strata ``X`` minus its ``ww``-weighted stratum means (Frisch–Waugh–Lovell).

    A column the strata explain (constant within every stratum, to 1 - R² < ``RANK_TOL``) raises
    :class:`FitError` naming it: its coefficient is not identified beside the stratum intercepts.
    """
    if strata is None:
        return X
    out = strata.demean(X, ww, workspace("strata", X.shape, layout(X)))
    before = np.einsum("i,ij,ij->j", ww, X, X)
    bad = np.flatnonzero(np.einsum("i,ij,ij->j", ww, out, out) <= RANK_TOL * before)
    if bad.size:
        shown = ", ".join(repr(names[j]) if names else f"column {j}" for j in bad)
        one = bad.size == 1
        raise FitError(
            f"{shown} {'is' if one else 'are'} constant within every stratum, so the stratum intercepts already "
            f"hold {'it' if one else 'them'} and {'its coefficient' if one else 'their coefficients'} cannot be "
            f"estimated; remove {'it' if one else 'them'} from the model."
        )
    return out
