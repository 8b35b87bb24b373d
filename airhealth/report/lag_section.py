"""The report section on lag structures: single days, distributed lags, and temperature over three weeks.

:func:`lag_structure_section` fits, for one outcome and pollutant, each single-day lag and each distributed
lag (cumulative effects), draws their lag–response curves, and fits temperature as a non-linear
exposure–lag term to show its cumulative exposure–response curve, its exposure–lag–response surface and the
minimum-mortality temperature. It returns a :class:`~airhealth.report.document.Section` of plain blocks.

References
----------
Schwartz J (2000). The distributed lag between air pollution and daily deaths. Epidemiology 11:320–326.
Gasparrini A, Armstrong B, Kenward MG (2010). Distributed lag non-linear models. Statistics in Medicine
29:2224–2234.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import pandas as pd

from ..model.bases.distributed_lags import SplineLag
from ..model.bases.exposure_lag import ExposureLagTerm, SplineResponse
from ..model.fitting import fit
from ..model.lag_predictions import minimum_risk_exposure
from ..studies.compare import compare_results
from .document import Figure, Section, Table, Text
from .labels import Labels, display_name
from .lag_plots import plot_exposure_lag_surface, plot_exposure_response, plot_lag_response
from .numbers import format_rr
from .tables import effects_table, format_effects

__all__ = ["lag_structure_section"]

SINGLE_LAGS = ("0", "1", "2", "3", "4", "5")
DISTRIBUTED_LAGS = ("dl0-5", "dl0-21:spline4")

_INTRO = (
    "A single-day lag credits the whole effect to one day; a distributed lag estimates the effect of one "
    "day's exposure on each of the following days and adds them up (the cumulative effect of a rise "
    "sustained over the whole window). 'dl0-5' has one free coefficient per lag; 'dl0-21:spline4' "
    "constrains the lag curve to a natural spline with 4 df over three weeks, which reveals effects that "
    "are spread out or partly displaced (Schwartz 2000). Days whose lag window contains a missing exposure "
    "are left out, so the longer lags use fewer days; QAIC values are only comparable between models "
    "fitted on the same days."
)


def _structure_table(single: list[Any], distributed: list[Any], per: float) -> pd.DataFrame:
    table = effects_table([*single, *distributed], per=per)
    kinds = ["single day"] * len(single) + ["distributed lag (cumulative)"] * len(distributed)
    shown = format_effects(table)
    shown.insert(3, "kind", kinds)
    return shown.drop(columns=[c for c in ("outcome", "exposure") if c in shown])


def _per_lag_table(distributed: list[Any], per: float) -> pd.DataFrame:
    frames = [r.lag_effects(per=per).assign(lag_structure=r.spec.lag.label) for r in distributed]
    out = pd.concat(frames, ignore_index=True)
    return out[["lag_structure", "lag", "coef", "se", "rr", "rr_low", "rr_high"]]


def _temperature_blocks(
    data: pd.DataFrame, outcome: str, exposure: str, lag: Any, term: ExposureLagTerm, options: dict[str, Any]
) -> list[Any]:
    opts = {k: v for k, v in options.items() if k not in ("temperature", "confounders")}
    confounders = (*options.get("confounders", ()), term)
    result = fit(data, outcome, exposure, lag=lag, temperature=None, confounders=confounders, **opts)
    mmt = minimum_risk_exposure(result, term=term)
    curve_ax = plot_exposure_response(result, term=term)
    surface_ax = plot_exposure_lag_surface(result, term=term, reference=mmt.exposure)
    effect = result.effect(per=10.0)
    return [
        Text(
            f"Temperature entered as a non-linear exposure-lag term ({term.exposure_lag_basis.label}) in place of the "
            f"usual temperature splines. The cumulative {outcome} risk is lowest at {term.column} "
            f"{mmt.exposure:.1f} (the {mmt.percentile:.0f}th percentile of days); from {mmt.low:.1f} to "
            f"{mmt.high:.1f} the risk is not significantly above that minimum (pointwise {mmt.level:.0%} tests; "
            "a descriptive band, not an interval for the minimum itself). With this temperature "
            f"control the {exposure} effect (lag {result.spec.lag.label}) is RR per 10 "
            f"{format_rr(effect.rr, effect.rr_low, effect.rr_high)}."
        ),
        Figure(
            f"{term.column}: cumulative relative risk over lags {term.exposure_lag_basis.lag.label} against the "
            "minimum, with the distribution of days",
            curve_ax.figure,
            "temperature_exposure_response",
        ),
        Figure(
            f"{term.column}: relative risk by temperature and lag, against {mmt.exposure:.1f}",
            surface_ax.figure,
            "temperature_exposure_lag_surface",
        ),
    ]


def lag_structure_section(
    data: pd.DataFrame,
    outcome: str,
    exposure: str,
    single_lags: Sequence[str] = SINGLE_LAGS,
    distributed: Sequence[Any] = DISTRIBUTED_LAGS,
    temperature_term: ExposureLagTerm | None = None,
    per: float = 10.0,
    labels: Labels | None = None,
    **model_options: Any,
) -> Section:
    """Build the lag-structure section of a report for one outcome and pollutant.

    Parameters
    ----------
    data : DataFrame
        Daily data as for :func:`airhealth.fit`.
    outcome, exposure : str
        Outcome counts and pollutant columns.
    single_lags : sequence of str
        Single-day lags to compare (default 0 to 5).
    distributed : sequence
        Distributed lag structures (strings or objects), shown with cumulative effects and lag curves.
    temperature_term : ExposureLagTerm, optional
        Temperature term of the non-linear part; default: natural spline with 4 df × spline lag 0–21 with
        4 df on the ``temperature`` option's column. Omitted when no temperature column is given.
    per : float
        Exposure increase for the relative risks.
    labels : mapping, optional
        Display names of the outcome and exposure columns for titles and captions.
    **model_options
        Other :class:`~airhealth.model.spec.ModelSpec` options (``temperature``, ``trend_df_per_year``, ...).

    Returns
    -------
    Section
        Text, a comparison table, a per-lag table, lag-response figures and, with temperature, the
        temperature exposure–response curve and surface.
    """
    fits = compare_results(data, [*single_lags, *distributed], outcome=outcome, exposure=exposure, **model_options)
    single, dist = fits[: len(single_lags)], fits[len(single_lags) :]
    unit = fits[0].spec.unit
    outcome_name, exposure_name = display_name(outcome, labels), display_name(exposure, labels)
    blocks: list[Any] = [
        Text(_INTRO),
        Table(
            f"{outcome_name} and {exposure_name}: relative risk per {per:g} {unit} by lag structure",
            _structure_table(single, dist, per),
            "lag_structures",
            note="Distributed lags show the cumulative effect over all their lags.",
        ),
    ]
    if dist:
        title = f"Per-lag effects of the distributed lags of {exposure_name} on {outcome_name} (RR per {per:g} {unit})"
        blocks.append(Table(title, _per_lag_table(dist, per), "lag_effects"))
    for result in dist:
        ax = plot_lag_response(result, per=per)
        name = f"lag_response_{result.spec.lag.label}"  # made a safe file name by the writer
        blocks.append(
            Figure(
                f"{exposure_name}: relative risk per {per:g} {result.spec.unit} at each lag, {result.spec.lag.label}",
                ax.figure,
                name,
            )
        )
    column = model_options.get("temperature")
    if temperature_term is None and column is not None:
        temperature_term = ExposureLagTerm(column, SplineResponse(df=4), SplineLag(0, 21, 4))
    if temperature_term is not None:
        main_lag = dist[0].spec.lag if dist else single[0].spec.lag
        blocks += _temperature_blocks(data, outcome, exposure, main_lag, temperature_term, model_options)
    return Section("Lag structures", blocks)
