"""The report section comparing study designs: time series and time-stratified case-crossover side by side.

:func:`design_section` turns the tidy table of :func:`airhealth.studies.design_comparison.compare_designs`
into a :class:`~airhealth.report.document.Section`: a short explanation, the estimates side by side (one
row per lag) and the tidy table as a CSV. The table holds no health counts (only days and strata), so no
small-count suppression applies.

References
----------
Armstrong BG, Gasparrini A, Tobias A (2014). Conditional Poisson models: a flexible alternative to
conditional logistic case cross-over analysis. BMC Med Res Methodol 14:122.
Janes H, Sheppard L, Lumley T (2005). Case-crossover analyses of air pollution exposure data: referent
selection strategies and their implications for bias. Epidemiology 16:717–726.
"""

from __future__ import annotations

import pandas as pd

from ..errors import SpecificationError
from ..studies.design_comparison import DESIGN_COLUMNS
from .document import Section, Table, Text
from .numbers import IntervalStyle, format_rr, rr_decimals

__all__ = ["design_section", "designs_side_by_side"]

_INTRO = (
    "The same association estimated by two designs. The time-series model controls season and long-term "
    "trend with a smooth function of time and day of week with indicators. The time-stratified "
    "case-crossover compares each day's count with the other days of its stratum (same year, month and "
    "day of week), fitted as the equivalent conditional Poisson model; strata without events carry no "
    "information and are left out. Temperature and the other confounders enter both models alike. Similar "
    "estimates suggest the result does not hinge on how time is controlled. Both are statistical "
    "associations, not proof of causation."
)


def _interval(row: pd.Series, digits: int, style: IntervalStyle) -> str:
    return format_rr(row["rr"], row["rr_low"], row["rr_high"], digits, style)


def designs_side_by_side(table: pd.DataFrame, digits: int | None = None, style: IntervalStyle = "to") -> pd.DataFrame:
    """One row per outcome, exposure and lag: each design's relative risk (CI) and days used, side by side.

    ``digits=None`` applies the report's decimals rule (:func:`~airhealth.report.numbers.rr_decimals`) to
    all rows and both designs at once, so the two columns line up; ``style`` is the interval style.
    """
    missing = [c for c in DESIGN_COLUMNS if c not in table]
    if missing:
        raise SpecificationError(
            f"the design comparison table lacks the column(s) {', '.join(map(repr, missing))}; "
            "pass the table airhealth.compare_designs returns."
        )
    if digits is None:
        digits = rr_decimals(table["rr_low"], table["rr_high"])
    rows = []
    for (outcome, exposure, lag), group in table.groupby(["outcome", "exposure", "lag"], sort=False):
        by = {row["design"]: row for _, row in group.iterrows()}
        ts, cc = by.get("time-series"), by.get("case-crossover")
        rows.append({
            "outcome": outcome, "exposure": exposure, "lag": lag,
            f"time series: RR per {group['per'].iloc[0]:g} {group['unit'].iloc[0]} (CI)":
                "" if ts is None else _interval(ts, digits, style),
            "case-crossover: RR (CI)": "" if cc is None else _interval(cc, digits, style),
            "time series: days": "" if ts is None else int(ts["n_days"]),
            "case-crossover: days": "" if cc is None else int(cc["n_days"]),
            "case-crossover: strata": "" if cc is None else int(cc["n_strata"]),
        })  # fmt: skip
    return pd.DataFrame(rows)


def design_section(
    table: pd.DataFrame,
    title: str = "Time series and case-crossover",
    digits: int | None = None,
    style: IntervalStyle = "to",
) -> Section:
    """A report section of the design comparison (``table`` from :func:`airhealth.compare_designs`)."""
    shown = designs_side_by_side(table, digits=digits, style=style)
    return Section(
        title,
        [
            Text(_INTRO),
            Table("Estimates by design", shown, "design_comparison"),  # the writer adds the abbreviation notes
            Table("Design comparison, all statistics", table.copy(), "design_comparison_tidy", display=False),
        ],
    )
