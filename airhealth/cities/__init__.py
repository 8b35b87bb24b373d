"""Many cities: the first stage over executors (``fit_cities``) and second-stage pooling of city estimates
(univariate and multivariate random effects)."""

from .first_stage import fit_cities, lag_vectors
from .inputs import CitySource, CsvFolder
from .multivariate import MultivariatePooled, pool_multivariate
from .pooling import PooledEffect, pool

__all__ = [
    "CitySource",
    "CsvFolder",
    "MultivariatePooled",
    "PooledEffect",
    "fit_cities",
    "lag_vectors",
    "pool",
    "pool_multivariate",
]
