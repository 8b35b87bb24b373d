"""The report section on attributable burden: totals, tables by period, the monthly figure and the caution.

Small counts, one rule: the observed cases behind a row are a total of daily counts, shown ``suppressed``
when the smallest positive daily count is below the threshold (:mod:`airhealth.report.suppression`).
Attributable numbers are model estimates, not counts of people, so they and their intervals are always
shown together, never as ``<threshold`` (which hid an estimate but printed its lower bound beside it).
The attributable fraction and its interval are hidden together wherever the row's cases are, since the
cases could be recovered as attributable number / fraction.
"""

from __future__ import annotations

from typing import Any

import pandas as pd

from .burden_plots import SIDE_WORDS, burden_by_month_shown, plot_burden_by_month
from .document import Figure, Section, Table, Text
from .suppression import check_threshold, suppress_table

__all__ = ["BREAKDOWN_TITLES", "burden_section", "suppressed_burden_table"]

ESTIMATES = ("attributable", "attributable_low", "attributable_high")
FRACTIONS = ("fraction", "fraction_low", "fraction_high")
BREAKDOWN_TITLES = {
    "year": "by year",
    "season": "by season (all years)",
    "month": "by calendar month (all years)",
    "year_month": "by month",
    "city": "by city",
}

_METHOD = (
    "Attributable number AN = Σ y_t (1 − exp(−β·max(x_t − x0, 0))) over the days counted, and attributable fraction "
    "AF = AN / Σ y_t, with x_t the model's exposure and x0 the counterfactual; distributed lags sum the "
    "contributions of each lag ({perspective} perspective, Gasparrini & Leone 2014). Intervals: {level:.0%} "
    "percentiles of {draws} Monte Carlo draws of the coefficients (seed {seed}); the delta-method interval of "
    "the total is {delta_low:.1f} to {delta_high:.1f}."
)


def suppressed_burden_table(result: Any, by: str, threshold: int | None) -> pd.DataFrame:
    """``result.table(by)`` with small counts hidden by the rules of this module (a copy)."""
    threshold = check_threshold(threshold)
    table = result.table(by)
    if threshold is None:
        return table
    smallest = result.smallest_counts(by)
    return suppress_table(table, threshold, aggregates=("cases", *FRACTIONS), smallest=smallest)


def _intro(result: Any) -> str:
    c = result.counterfactual
    side = SIDE_WORDS.get(result.side, result.side)
    text = (
        f"Cases of {result.outcome} attributable to {result.exposure} (lag {result.lag}) {side} the counterfactual "
        f"{c.describe()}, coefficients from the {result.source}. "
    )
    if c.note:
        text += f"Counterfactual note: {c.note}. "
    return text + _METHOD.format(
        perspective=result.perspective, level=result.level, draws=result.draws, seed=result.seed,
        delta_low=result.delta_low, delta_high=result.delta_high,
    )  # fmt: skip


def _total_table(result: Any) -> tuple[pd.DataFrame, tuple[float, ...]]:
    d = result.to_dict()
    row = {"period": "all days", "days": d["n_days"], "cases": d["cases"]}
    row.update({k: d[k] for k in (*ESTIMATES, *FRACTIONS)})
    per_year = [v for v in result.smallest_counts("year") if v == v]  # NaN: a year without a positive count
    return pd.DataFrame([row]), (min(per_year) if per_year else float("nan"),)


def _missing_text(result: Any) -> str:
    m = result.missing_exposure_days()
    left = len(result.left_out)
    if not left:
        return "Every day of the series was counted."
    text = f"{left} day(s) were not counted (missing exposure or outcome, or a lag window outside the series)"
    if m["n"]:
        text += f"; {m['n']} of them for a missing exposure, from {m['first']} to {m['last']}"
    return text + ". They are left out, not counted as days without excess."


def _table_block(result: Any, by: str, threshold: int | None) -> Table:
    return Table(
        f"Attributable {result.outcome} {BREAKDOWN_TITLES[by]}",
        suppressed_burden_table(result, by, threshold),
        f"burden_{by}",
        aggregate_columns=("cases", *FRACTIONS),
        smallest_counts=result.smallest_counts(by),
    )


def burden_section(result: Any, suppress_below: int | None = None) -> Section:
    """A report :class:`~airhealth.report.document.Section` for a :class:`~airhealth.burden.BurdenResult`.

    Text (method, counterfactual and its source, intervals), the caution, the total, tables by year, season,
    calendar month (and city for pooled estimates), the figure of attributable cases by month, and the days
    left out; small counts hidden below ``suppress_below``.
    """
    threshold = check_threshold(suppress_below)
    total, smallest = _total_table(result)
    shown = suppress_table(total, threshold, aggregates=("cases", *FRACTIONS), smallest=smallest)
    blocks: list[Any] = [
        Text(_intro(result)),
        Text(result.caution),
        Table(f"Attributable {result.outcome}: total", shown, "burden_total"),
    ]
    blocks += [_table_block(result, by, threshold) for by in ("year", "season", "month") if by in result.breakdowns()]
    if "city" in result.breakdowns():
        blocks.append(_table_block(result, "city", threshold))
    _, _, note = burden_by_month_shown(result, threshold)
    ax = plot_burden_by_month(result, suppress_below=threshold)
    blocks.append(Figure(f"Attributable {result.outcome} by month", ax.figure, "burden_by_month", note=note or None))
    blocks.append(Text(_missing_text(result)))
    return Section("Attributable burden", blocks)
