"""Many cities: second-stage pooling of city estimates (univariate and multivariate random effects)."""

from .multivariate import MultivariatePooled, pool_multivariate
from .pooling import PooledEffect, pool

__all__ = ["MultivariatePooled", "PooledEffect", "pool", "pool_multivariate"]
