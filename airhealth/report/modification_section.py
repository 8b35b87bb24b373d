"""Report sections on robustness to co-pollutants and on effect modification.

:func:`copollutant_section` shows the table of :func:`airhealth.copollutant_table` (the exposure's relative
risk alone and adjusted for each co-pollutant, on the same days); :func:`group_effects_section` shows a
fit with a modifier (the relative risk in each level and the Wald test of equal effects);
:func:`modification_section` puts both in one section. Each returns a
:class:`~airhealth.report.document.Section` of plain blocks; the writers escape every text. No table holds
health counts (days used only), so small-count suppression has nothing to hide here.

References
----------
Bhaskaran K, Gasparrini A, Hajat S, Smeeth L, Armstrong B (2013). Time series regression studies in
environmental epidemiology. Int J Epidemiol 42:1187–1195.
Katsouyanni K, et al. (2001). Confounding and effect modification in the short-term effects of ambient
particles on total mortality. Epidemiology 12:521–531.
"""

from __future__ import annotations

import html
from typing import Any

import pandas as pd

from ..errors import SpecificationError
from .document import Section, Table, Text
from .numbers import IntervalStyle, format_decimal, format_p, format_rr, rr_decimals

__all__ = ["copollutant_section", "group_effects_html", "group_effects_section", "modification_section"]

_COPOLLUTANT_TEXT = (
    "Each row is a model of the same days: the exposure alone, then adjusted for one other pollutant at the "
    "same lag. A relative risk that changes little when a co-pollutant is added is less likely to reflect "
    "that pollutant; pollutants that vary together strongly (correlation above 0.7 in absolute value) "
    "cannot be told apart well, and the adjusted estimate then has a wide interval. These are statistical "
    "associations, not proof that either pollutant causes the outcome."
)
_GROUP_TEXT = (
    "The exposure's relative risk is estimated separately in each level of {modifier}, in one model with "
    "common confounder terms and a main effect for each level. The Wald test asks whether the effects differ "
    "more than chance would explain ({test}). Differences between levels are associations, not proof of a "
    "causal difference."
)


def _rr_text(table: pd.DataFrame, style: IntervalStyle = "to") -> list[str]:
    """The column of relative risks (CI) by the report's one rule (:mod:`airhealth.report.numbers`)."""
    places = rr_decimals(table["rr_low"], table["rr_high"])
    return [
        format_rr(r, lo, hi, places, style)
        for r, lo, hi in zip(table["rr"], table["rr_low"], table["rr_high"], strict=True)
    ]


def copollutant_section(
    table: pd.DataFrame, unit: str = "µg/m³", title: str = "Adjustment for co-pollutants"
) -> Section:
    """The single- vs two-pollutant table of :func:`airhealth.copollutant_table` as a report section."""
    needed = {"exposure", "adjusted_for", "lag", "per", "rr", "rr_low", "rr_high", "p_value", "correlation", "n_days"}
    if not needed <= set(table.columns):
        raise SpecificationError(
            f"copollutant_section needs the table of airhealth.copollutant_table; missing columns "
            f"{sorted(needed - set(table.columns))}."
        )
    if table.empty:
        raise SpecificationError("copollutant_section got an empty table; pass airhealth.copollutant_table(...).")
    per = float(table["per"].iloc[0])
    shown = pd.DataFrame(
        {
            "exposure": table["exposure"],
            "adjusted for": [("none (single pollutant)" if pd.isna(a) else str(a)) for a in table["adjusted_for"]],
            "lag": table["lag"],
            f"RR per {per:g} {unit} (95% CI)": _rr_text(table),
            "p": table["p_value"].map(format_p),
            "correlation with exposure": table["correlation"].map(lambda v: format_decimal(v, 2)),
            "days": table["n_days"],
        }
    )
    return Section(
        title,
        [Text(_COPOLLUTANT_TEXT), Table("Single- and two-pollutant estimates", shown, name="copollutant_estimates")],
    )


def group_effects_section(result: Any, per: float = 10.0, level: float = 0.95, title: str | None = None) -> Section:
    """The effects by group and the test of equal effects of a fit with a modifier, as a report section."""
    if not getattr(result, "groups", ()):
        raise SpecificationError(
            "group_effects_section needs a fit with a modifier, e.g. airhealth.fit(..., modifier='season')."
        )
    spec = result.spec
    table = result.effects_by_group(per=per, level=level)
    test = result.modification_test()
    pct = f"{level * 100:g}%"
    shown = pd.DataFrame(
        {
            spec.modifier: table["group"].map(str),
            f"RR per {per:g} {spec.unit} ({pct} CI)": _rr_text(table),
            "p": table["p_value"].map(format_p),
            "days": table["n_days"],
        }
    )
    test_text = f"chi-square {format_decimal(test['statistic'], 2)} on {test['df']} df, p = {format_p(test['p_value'])}"
    note = f"{spec.outcome}, {spec.exposure} at lag {spec.lag.label}; test of equal effects: {test_text}."
    return Section(
        title or f"Effect modification by {spec.modifier}",
        [
            Text(_GROUP_TEXT.format(modifier=spec.modifier, test=test_text)),
            Table(f"Relative risk by {spec.modifier}", shown, name=f"effects_by_{spec.modifier}", note=note),
        ],
    )


def group_effects_html(result: Any, per: float = 10.0) -> str:
    """A notebook view of a fit with a modifier: the effects by group and the test (every text escaped)."""
    spec = result.spec
    table = result.effects_by_group(per=per).drop(columns="events")
    test = result.modification_test()
    caption = html.escape(
        f"{spec.outcome} ~ {spec.exposure} lag {spec.lag.label} by {spec.modifier}: RR per {per:g} {spec.unit}; "
        f"equal effects: Wald chi-square {format_decimal(test['statistic'], 2)} on {test['df']} df, "
        f"p = {format_p(test['p_value'])}"
    )
    return f"<p>{caption}</p>" + table.to_html(index=False, escape=True, float_format=lambda v: f"{v:.4g}")


def modification_section(
    copollutants: pd.DataFrame | None = None,
    grouped: Any = None,
    per: float = 10.0,
    level: float = 0.95,
    unit: str = "µg/m³",
) -> Section:
    """One section with the co-pollutant table and/or the effects by group (at least one must be given)."""
    if copollutants is None and grouped is None:
        raise SpecificationError("modification_section needs a co-pollutant table, a fit with a modifier, or both.")
    blocks: list[Any] = []
    if copollutants is not None:
        blocks += copollutant_section(copollutants, unit=unit).blocks
    if grouped is not None:
        blocks += group_effects_section(grouped, per=per, level=level).blocks
    return Section("Co-pollutants and effect modification", blocks)
