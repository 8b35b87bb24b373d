"""Building blocks of the design matrix: splines, confounder terms, lag structures, distributed lags."""
