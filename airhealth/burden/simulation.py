r"""Attributable numbers at the estimate and over Monte Carlo draws of the coefficients, summed per cell.

For contrast rows :math:`R_t` and case weights :math:`n_t` (:mod:`airhealth.burden.excess`), the attributable
number at coefficients :math:`\theta` is

.. math:: \mathrm{AN}(\theta) = \sum_t n_t \left(1 - e^{-R_t \theta}\right),

computed per cell (a run of consecutive days: one month of one city) so that any breakdown is a sum of cells.
Uncertainty:

* **Monte Carlo** — :math:`\theta^{(s)} \sim N(\hat\theta, V)`, :math:`s = 1..S`, drawn as
  :math:`\hat\theta + L z^{(s)}` with :math:`LL^\top = V` and standard normal :math:`z^{(s)}` from
  ``numpy.random.default_rng(seed)``; the interval is the :math:`(1\pm\text{level})/2` percentiles of
  :math:`\mathrm{AN}(\theta^{(s)})`. All draws are evaluated as matrix products (days × draws), in blocks of
  draws to bound memory; the normals are drawn at once, so the result does not depend on the block size.
* **Delta method** — :math:`\mathrm{SE} = \sqrt{g^\top V g}` with
  :math:`g = \partial \mathrm{AN}/\partial\theta = \sum_t n_t e^{-R_t\hat\theta} R_t`, interval
  :math:`\mathrm{AN} \pm z\,\mathrm{SE}`.

References
----------
Gasparrini A, Leone M (2014). Attributable risk from distributed lag models. BMC Med Res Methodol 14:55
(Monte Carlo intervals for attributable numbers from the multivariate normal of the coefficients).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._threads import fitting_threads
from ..errors import SpecificationError

__all__ = ["DEFAULT_DRAWS", "DEFAULT_SEED", "MIN_DRAWS", "Simulation", "check_draws", "simulate"]

#: Default number of draws and seed: results are reproducible unless the user asks otherwise.
DEFAULT_DRAWS = 1000
DEFAULT_SEED = 20140055
#: Fewest draws accepted: with 100 draws the 2.5th and 97.5th percentiles rest on 2-3 draws each; fewer give
#: intervals that change from seed to seed (common practice, no source).
MIN_DRAWS = 100
#: Largest draws × days block evaluated at once (8 MB of float64, to stay near the cache).
_BLOCK = 1 << 20


@dataclass(frozen=True)
class Simulation:
    """Attributable numbers per cell at the estimate (``point``) and per draw (``draws``: cells × S)."""

    point: np.ndarray
    draws: np.ndarray
    delta_se: float


def check_draws(draws: object, seed: object) -> tuple[int, int]:
    """``draws`` a whole number >= MIN_DRAWS and ``seed`` a whole number >= 0, else SpecificationError."""
    if isinstance(draws, bool) or not isinstance(draws, int | np.integer) or draws < MIN_DRAWS:
        raise SpecificationError(
            f"draws={draws!r}: give a whole number of at least {MIN_DRAWS} Monte Carlo draws (default "
            f"{DEFAULT_DRAWS}); fewer give percentile intervals that change from one seed to the next."
        )
    if isinstance(seed, bool) or not isinstance(seed, int | np.integer) or seed < 0:
        raise SpecificationError(f"seed={seed!r}: give a whole number >= 0 (default {DEFAULT_SEED}).")
    return int(draws), int(seed)


def _factor(cov: np.ndarray) -> np.ndarray:
    """``L`` with ``L Lᵀ = cov`` (Cholesky, or the symmetric square root when ``cov`` is only semi-definite)."""
    try:
        return np.linalg.cholesky(cov)
    except np.linalg.LinAlgError:
        values, vectors = np.linalg.eigh((cov + cov.T) / 2)
        return vectors * np.sqrt(np.clip(values, 0.0, None))


def _cell_sums(daily: np.ndarray, starts: np.ndarray) -> np.ndarray:
    if daily.shape[0] == 0:
        return np.zeros((0, *daily.shape[1:]))
    return np.add.reduceat(daily, starts, axis=0)


def _nonzero_days(rows: np.ndarray, starts: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Days with any excess (the others add exactly 0 at every draw), their cells' starts and those cells."""
    used = np.flatnonzero(rows.any(axis=1))
    cell_of_day = np.repeat(np.arange(len(starts)), np.diff(np.append(starts, n)))[used]
    first = np.flatnonzero(np.diff(cell_of_day, prepend=-1) != 0)
    return used, first, cell_of_day[first]


def simulate(
    rows: np.ndarray,
    cases: np.ndarray,
    starts: np.ndarray,
    theta: np.ndarray,
    cov: np.ndarray,
    draws: int,
    seed: int,
) -> Simulation:
    """Attributable numbers per cell (cells start at the day indices ``starts``) at θ̂ and over the draws."""
    theta = np.asarray(theta, dtype=float)
    cov = np.atleast_2d(np.asarray(cov, dtype=float))
    n = rows.shape[0]
    relative = np.exp(-(rows @ theta))
    point = _cell_sums(cases * (1.0 - relative), starts)
    gradient = rows.T @ (cases * relative)
    delta_se = float(np.sqrt(max(gradient @ cov @ gradient, 0.0)))
    rng = np.random.default_rng(seed)
    thetas = theta + rng.standard_normal((draws, theta.size)) @ _factor(cov).T
    out = np.zeros((len(starts), draws))
    used, first, cells = _nonzero_days(rows, starts, n)
    if used.size == 0:
        return Simulation(point, out, delta_se)
    rows_t, weights = np.ascontiguousarray(rows[used].T), cases[used]
    cell_cases = np.add.reduceat(weights, first)
    block = max(1, _BLOCK // used.size)
    with fitting_threads(used.size, theta.size):  # the engine's BLAS policy: one thread for products this thin
        for lo in range(0, draws, block):  # blocks of draws, each a (draws × days) matrix product
            part = thetas[lo : lo + block] @ rows_t
            np.negative(part, out=part)
            np.exp(part, out=part)  # exp(-Rθ); AN = Σ n (1 - exp(-Rθ)) per cell, below
            part *= weights
            out[cells, lo : lo + block] = (cell_cases - np.add.reduceat(part, first, axis=1)).T
    return Simulation(point, out, delta_se)
