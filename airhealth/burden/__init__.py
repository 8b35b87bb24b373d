"""Attributable burden: numbers and fractions of cases attributable to exposure beyond a counterfactual."""

from .attributable import burden, burden_from_estimate, burden_pooled
from .counterfactual import Counterfactual, resolve_counterfactual
from .presets import PRESETS, Preset, find_preset, preset_table
from .result import CAUTION, BurdenResult

__all__ = [
    "CAUTION",
    "PRESETS",
    "BurdenResult",
    "Counterfactual",
    "Preset",
    "burden",
    "burden_from_estimate",
    "burden_pooled",
    "find_preset",
    "preset_table",
    "resolve_counterfactual",
]
