"""airhealth: short-term health effects of air pollution from daily time series.

Results are statistical associations, not proof of causation; they inform but do not replace expert
review, local regulation or licensed public-health practice.
"""

from .cities import pool, pool_multivariate
from .errors import (
    AirhealthError,
    AirhealthWarning,
    ConvergenceWarning,
    DataError,
    DataWarning,
    DispersionWarning,
    FitError,
    SpecificationError,
)
from .model.bases.distributed_lags import PolynomialLag, SplineLag, UnconstrainedLag
from .model.bases.exposure_lag import (
    ExposureLagBasis,
    ExposureLagTerm,
    LinearResponse,
    SplineResponse,
    ThresholdResponse,
)
from .model.bases.lag_structures import MovingAverage, SingleDay, parse_lag
from .model.bases.terms import Categorical, Linear, Spline
from .model.fitting import fit
from .model.lag_predictions import exposure_response, lag_response, minimum_risk_exposure
from .model.result import FitResult
from .model.spec import ModelSpec
from .prep.align import align_daily
from .report.city_report import write_report
from .sample import load_sample, load_sample_tables
from .studies.compare import compare
from .studies.diagnostics import Diagnostics, diagnose
from .studies.sensitivity import sensitivity
from .studies.time_df_choice import TimeDfChoice, choose_time_df

__version__ = "0.1.0"

__all__ = [
    "AirhealthError",
    "AirhealthWarning",
    "Categorical",
    "ConvergenceWarning",
    "DataError",
    "DataWarning",
    "Diagnostics",
    "DispersionWarning",
    "ExposureLagBasis",
    "ExposureLagTerm",
    "FitError",
    "FitResult",
    "Linear",
    "LinearResponse",
    "ModelSpec",
    "MovingAverage",
    "PolynomialLag",
    "SingleDay",
    "SpecificationError",
    "Spline",
    "SplineLag",
    "SplineResponse",
    "ThresholdResponse",
    "TimeDfChoice",
    "UnconstrainedLag",
    "__version__",
    "align_daily",
    "choose_time_df",
    "compare",
    "diagnose",
    "exposure_response",
    "fit",
    "lag_response",
    "load_sample",
    "load_sample_tables",
    "minimum_risk_exposure",
    "parse_lag",
    "pool",
    "pool_multivariate",
    "sensitivity",
    "write_report",
]
