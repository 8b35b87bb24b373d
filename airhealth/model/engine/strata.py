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

from dataclasses import dataclass

import numpy as np

from ...errors import FitError

__all__ = ["StratumIndex"]


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
