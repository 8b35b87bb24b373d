"""The methods paragraph of a report: the model, its confounders and df, the lags, the interval type and the
software versions, in plain English (:func:`describe_model`; re-exported by
:mod:`airhealth.report.city_report`).

References
----------
Newey WK, West KD (1987). A simple, positive semi-definite, heteroskedasticity and autocorrelation consistent
covariance matrix. Econometrica 55:703–708 (the HAC intervals the paragraph names).
"""

from __future__ import annotations

from collections.abc import Sequence

import pandas as pd

from ..model.spec import DEFAULT_UNIT, ModelSpec

__all__ = ["describe_model", "software_text"]

_FAMILY = {
    "quasipoisson": "Quasi-Poisson",
    "poisson": "Poisson",
    "negbin": "Negative binomial",
}


def _interval_text(spec: ModelSpec) -> str:
    """How the standard errors behind the intervals were computed."""
    if getattr(spec, "interval", "quasi-poisson") == "hac":
        lags = "by the default rule floor(4(n/100)^(2/9))" if spec.hac_lags is None else f"{spec.hac_lags}"
        return (
            " from Newey–West (HAC) standard errors robust to residual autocorrelation (Bartlett kernel, "
            f"truncation lag {lags}; Newey & West 1987)"
        )
    if spec.family == "quasipoisson":
        return " from quasi-Poisson standard errors (scaled by the Pearson dispersion)"
    return ""


def software_text() -> str:
    """The software versions behind a report (for its methods paragraph)."""
    import platform

    import numpy
    import scipy

    from .. import __version__

    return (
        f"Computed with airhealth {__version__} (Python {platform.python_version()}, NumPy {numpy.__version__}, "
        f"SciPy {scipy.__version__}, pandas {pd.__version__})."
    )


def _lags_text(lags: Sequence[str]) -> str:
    if not lags:
        return ""
    return (
        f" Lag structures: {', '.join(lags)} (0: the same day; a-b: the mean of days a to b; dla-b: a distributed "
        "lag over days a to b)."
    )


def describe_model(
    spec: ModelSpec,
    n_calendar: int,
    per: float = 10.0,
    unit: str = DEFAULT_UNIT,
    level: float = 0.95,
    lags: Sequence[str] = (),
) -> str:
    """A plain-English description of the confounder model of ``spec``, for a report's methods section:
    the model, its confounders and their df, the lag structures (``lags``, labels), the interval type and
    the software versions."""
    years = n_calendar / 365.25
    if spec.seasonality == "spline":
        season = f"a natural spline of time with {spec.trend_df_per_year:g} df per year"
    else:
        season = f"{spec.fourier_pairs} sine/cosine pairs per year and a linear trend"
    parts = [
        f"{_FAMILY[spec.family]} time-series regression of daily counts over {n_calendar} days "
        f"({years:.1f} years), controlling for season and trend with {season}"
    ]
    crossover = getattr(spec, "design", "time-series") == "case-crossover"
    if crossover:  # strata replace the time spline and the day-of-week indicators (docs/case-crossover.md)
        parts = [
            f"Time-stratified case-crossover over {n_calendar} days ({years:.1f} years), fitted as a conditional "
            f"{'quasi-Poisson' if spec.family == 'quasipoisson' else 'Poisson'} model: each day is compared with "
            "the days of the same year, month and day of week, which controls season, trend and day of week"
        ]
    if spec.temperature:
        parts.append(f"natural splines of same-day {spec.temperature} ({spec.temperature_df} df)")
        if spec.temperature_lags:
            first, last = spec.temperature_lags
            parts.append(f"of its mean over lags {first}–{last} ({spec.temperature_lag_df} df)")
    if spec.humidity:
        parts.append(f"a natural spline of {spec.humidity} ({spec.humidity_df} df)")
    if spec.day_of_week and not crossover:
        parts.append("day-of-week indicators")
    if spec.holidays:
        parts.append(f"a public-holiday indicator ({spec.holidays})")
    parts += [f"{t.name}" for t in spec.confounders]
    if spec.residual_lags:
        parts.append(
            f"the deviance residuals of a first fit at "
            f"{'lag 1' if spec.residual_lags == 1 else f'lags 1–{spec.residual_lags}'} (a transitional model, "
            "Brumback et al. 2000)"
        )
    return (
        "; ".join(parts)
        + f". Relative risks are per {per:g} {unit} with {level:.0%} Wald intervals{_interval_text(spec)}; "
        "single-day lags use the "
        "exposure of that day, moving averages the mean of the days shown, distributed lags the sum of the "
        "effects of every lag day (the cumulative effect)." + _lags_text(lags) + " " + software_text()
    )
