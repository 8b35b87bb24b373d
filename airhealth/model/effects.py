r"""Relative risks from regression coefficients, and the textbook 2×2 risk ratio.

For a log-linear model with exposure coefficient :math:`\beta` (per unit) and standard error
:math:`\mathrm{SE}`, the relative risk for an increase of :math:`\Delta` units is
:math:`\mathrm{RR} = e^{\Delta\beta}` with Wald interval :math:`e^{\Delta(\beta \pm z_{1-\alpha/2}\mathrm{SE})}`,
the percent change is :math:`100(\mathrm{RR} - 1)` and the two-sided p-value is
:math:`2\{1 - \Phi(|\beta| / \mathrm{SE})\}`.

References
----------
Rothman KJ, Greenland S, Lash TL (2008). Modern Epidemiology, 3rd ed., ch. 14 (risk ratio and its
log-scale interval from a 2×2 table).
Bhaskaran K, et al. (2013). Time series regression studies in environmental epidemiology.
Int J Epidemiol 42:1187–1195 (relative risk per unit increase from a Poisson coefficient).
"""

from __future__ import annotations

import html
import math
from dataclasses import asdict, dataclass

import numpy as np
from scipy import special

from ..errors import SpecificationError

__all__ = ["Effect", "normal_quantile", "relative_risk", "risk_ratio_2x2"]


def normal_quantile(level: float) -> float:
    """The two-sided normal quantile ``z`` of a confidence ``level`` (1.959964 for 0.95)."""
    if isinstance(level, bool) or not isinstance(level, int | float | np.number) or not 0 < level < 1:
        raise SpecificationError(f"confidence level must be between 0 and 1, got {level!r}.")
    return float(special.ndtri(0.5 + level / 2))


@dataclass(frozen=True)
class Effect:
    """A relative risk for an exposure increase of ``per`` units, with its interval and p-value."""

    exposure: str
    lag: str
    per: float
    coef: float
    se: float
    rr: float
    rr_low: float
    rr_high: float
    percent_change: float
    percent_low: float
    percent_high: float
    p_value: float
    level: float = 0.95
    per_label: str = ""

    def to_dict(self) -> dict[str, float | str]:
        return asdict(self)

    def __str__(self) -> str:
        unit = self.per_label or f"{self.per:g}"
        pct = round(self.level * 100)
        return (
            f"{self.exposure} lag {self.lag}: RR per {unit} = {self.rr:.4f} "
            f"({pct}% CI {self.rr_low:.4f}–{self.rr_high:.4f}), p = {self.p_value:.3g}"
        )

    def _repr_html_(self) -> str:
        unit = self.per_label or f"{self.per:g}"
        pct = round(self.level * 100)
        return (
            "<table><thead><tr><th>exposure</th><th>lag</th><th>increase</th><th>RR</th>"
            f"<th>{pct}% CI</th><th>% change</th><th>p</th></tr></thead><tbody><tr>"
            f"<td>{html.escape(self.exposure)}</td><td>{html.escape(self.lag)}</td><td>{html.escape(unit)}</td>"
            f"<td>{self.rr:.4f}</td>"
            f"<td>{self.rr_low:.4f}–{self.rr_high:.4f}</td><td>{self.percent_change:.2f}</td>"
            f"<td>{self.p_value:.3g}</td></tr></tbody></table>"
        )


#: Largest |log relative risk| (with its interval) reported; exp(700) is near the largest double.
MAX_LOG_RR = 700.0


def relative_risk(
    coef: float,
    se: float,
    per: float = 10.0,
    level: float = 0.95,
    exposure: str = "",
    lag: str = "",
    per_label: str = "",
) -> Effect:
    """Relative risk for an increase of ``per`` units from a log-scale coefficient per unit.

    Examples
    --------
    >>> e = relative_risk(0.001, 0.0004, per=10)
    >>> round(e.rr, 6), round(e.rr_low, 6), round(e.rr_high, 6)
    (1.01005, 1.002162, 1.018)
    """
    if not np.isfinite(per) or per <= 0:
        raise SpecificationError(f"per must be a positive number of exposure units, got {per!r}.")
    if not np.isfinite(se) or se < 0:
        raise SpecificationError(f"standard error must be finite and >= 0, got {se!r}.")
    z = normal_quantile(level)
    if not abs(per) * (abs(coef) + z * se) < MAX_LOG_RR:  # also catches a non-finite coefficient
        name = f" of {exposure!r}" if exposure else ""
        raise SpecificationError(
            f"the relative risk{name} for {per:g} units overflows: the log relative risk per unit is {coef:.4g} "
            f"(SE {se:.3g}), so {per:g} units give exp({per * coef:.4g}). The exposure is probably on a much "
            "smaller scale than its unit says (e.g. g/m³ for µg/m³); rescale it or give per= in its own scale."
        )
    rr = math.exp(per * coef)
    low, high = math.exp(per * (coef - z * se)), math.exp(per * (coef + z * se))
    p = float(2 * special.ndtr(-abs(coef) / se)) if se > 0 else float("nan")
    return Effect(
        exposure=exposure,
        lag=lag,
        per=float(per),
        coef=float(coef),
        se=float(se),
        rr=rr,
        rr_low=low,
        rr_high=high,
        percent_change=100 * (rr - 1),
        percent_low=100 * (low - 1),
        percent_high=100 * (high - 1),
        p_value=p,
        level=level,
        per_label=per_label,
    )


@dataclass(frozen=True)
class RiskRatio:
    """Risk ratio from a 2×2 table with its log-scale Wald interval."""

    risk_exposed: float
    risk_unexposed: float
    risk_difference: float
    risk_ratio: float
    low: float
    high: float


def risk_ratio_2x2(a: int, b: int, c: int, d: int, level: float = 0.95) -> RiskRatio:
    """Risk ratio of a 2×2 table: ``a`` cases and ``b`` non-cases among the exposed, ``c``, ``d`` unexposed.

    ``RR = [a/(a+b)] / [c/(c+d)]``, with ``SE(log RR) = sqrt(1/a − 1/(a+b) + 1/c − 1/(c+d))``.
    """
    cells = np.array([a, b, c, d], dtype=float)
    if (cells < 0).any() or not np.isfinite(cells).all():
        raise SpecificationError(f"2×2 table cells must be finite counts >= 0, got {a}, {b}, {c}, {d}.")
    if a == 0 or c == 0:
        raise SpecificationError("the risk ratio needs at least one case in each exposure group.")
    r1, r0 = a / (a + b), c / (c + d)
    rr = r1 / r0
    se = math.sqrt(1 / a - 1 / (a + b) + 1 / c - 1 / (c + d))
    z = normal_quantile(level)
    return RiskRatio(r1, r0, r1 - r0, rr, rr * math.exp(-z * se), rr * math.exp(z * se))
