"""airhealth: short-term health effects of air pollution from daily time series.

Results are statistical associations, not proof of causation; they inform but do not replace expert
review, local regulation or licensed public-health practice.
"""

from .burden import BurdenResult, burden_from_estimate, burden_pooled, preset_table
from .burden import burden as attributable_burden
from .cities import fit_cities, pool, pool_multivariate
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
from .prep.calendar import season_column
from .report.city_report import write_report
from .report.export import export_table
from .sample import load_sample, load_sample_tables
from .studies.compare import compare
from .studies.copollutants import copollutant_table
from .studies.design_comparison import compare_designs
from .studies.diagnostics import Diagnostics, diagnose
from .studies.outcomes import fit_outcomes
from .studies.sensitivity import sensitivity
from .studies.time_df_choice import TimeDfChoice, choose_time_df

__version__ = "0.1.0"

__all__ = [
    "AirhealthError",
    "AirhealthWarning",
    "BurdenResult",
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
    "attributable_burden",
    "burden_from_estimate",
    "burden_pooled",
    "choose_time_df",
    "compare",
    "compare_designs",
    "copollutant_table",
    "diagnose",
    "export_table",
    "exposure_response",
    "fit",
    "fit_cities",
    "fit_outcomes",
    "lag_response",
    "load_sample",
    "load_sample_tables",
    "minimum_risk_exposure",
    "parse_lag",
    "pool",
    "pool_multivariate",
    "preset_table",
    "season_column",
    "sensitivity",
    "write_report",
]
