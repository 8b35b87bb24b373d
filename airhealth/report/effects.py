"""Relative risks for reports: re-exported from :mod:`airhealth.model.effects`, where they are computed."""

from ..model.effects import Effect, RiskRatio, relative_risk, risk_ratio_2x2

__all__ = ["Effect", "RiskRatio", "relative_risk", "risk_ratio_2x2"]
