"""Tidy effect tables and their display views.

Tables are plain DataFrames (one row per model) holding numbers at full precision; the display views here
turn them into text through :mod:`airhealth.report.numbers` (the one place numbers become text), so the
numbers stay numbers for anyone who wants to compute with them, and every format shows the same text.
"""

from __future__ import annotations

import html
import re
from collections.abc import Iterable
from typing import Any

import numpy as np
import pandas as pd

from ..model.result import SUMMARY_COLUMNS
from .labels import Labels, display_name, label_frame
from .numbers import (
    IntervalStyle,
    format_coef,
    format_count,
    format_decimal,
    format_number,
    format_p,
    format_percent_change,
    format_rr,
    percent_decimals,
    rr_decimals,
)

__all__ = ["abbreviation_notes", "display_table", "effects_table", "format_effects", "result_html", "table_notes"]

EFFECT_COLUMNS = [c for c in SUMMARY_COLUMNS if c not in ("coef", "se")]

# Columns of the library's tables that hold counts (whole numbers) and per-unit coefficients.
COUNT_COLUMNS = frozenset({"n_days", "days", "n_dropped", "total", "min", "max", "n", "events"})
COEF_COLUMNS = frozenset({"coef", "se"})
P_COLUMNS = frozenset({"p_value", "p"})
FIXED_DECIMALS = {
    "dispersion": 2,
    "qaic": 1,
    "qaic_common": 1,
    "delta_qaic_common": 1,
    "i2": 1,
    "q": 2,
}  # fit statistics: a fixed number of decimals per column


def effects_table(results: Iterable[Any], per: float = 10.0, level: float = 0.95, *, iqr: bool = False) -> pd.DataFrame:
    """One row per fitted model: the effect per ``per`` units of the exposure's ``unit`` and fit statistics.

    With ``iqr=True`` the effect per interquartile range of the exposure on the days each model used is
    added beside it: ``exposure_iqr``, ``rr_iqr``, ``rr_iqr_low``, ``rr_iqr_high``. QAIC is comparable only
    between models fitted on the same days (Peng, Dominici & Louis 2006): when the models of one outcome and
    exposure used different days (a deeper lag loses more), their ``qaic`` is left empty —
    :func:`airhealth.compare` compares them on common days.
    """
    results = list(results)
    frame = pd.DataFrame([r.to_dict(per=per, level=level) for r in results])
    cols = [c for c in [*EFFECT_COLUMNS, "coef", "se", "interval"] if c in frame.columns]
    out = frame[cols].copy()
    if "qaic" in out and results:
        out.loc[~_same_days_as_group(results, frame), "qaic"] = np.nan
    if "per" in out and "unit" in frame:
        out.insert(out.columns.get_loc("per") + 1, "unit", frame["unit"])
    if iqr and results:
        effects = [r.effect(scale="iqr", level=level) for r in results]
        out["exposure_iqr"] = [r.exposure_iqr for r in results]
        out["rr_iqr"] = [e.rr for e in effects]
        out["rr_iqr_low"] = [e.rr_low for e in effects]
        out["rr_iqr_high"] = [e.rr_high for e in effects]
    return out


def _same_days_as_group(results: list[Any], frame: pd.DataFrame) -> np.ndarray:
    """Whether each model's outcome × exposure group has all its models fitted on one set of days."""
    days = [hash(tuple(r.fitted.index.asi8)) for r in results]
    keys = list(zip(frame.get("outcome", [""] * len(results)), frame.get("exposure", [""] * len(results)), strict=True))
    groups: dict[Any, set[int]] = {}
    for key, d in zip(keys, days, strict=True):
        groups.setdefault(key, set()).add(d)
    return np.array([len(groups[k]) == 1 for k in keys])


def _per_text(table: pd.DataFrame, column: str) -> list[str]:
    """``10 ppb`` from an amount column and the ``unit`` column (the amount alone when there is no unit)."""
    units = table["unit"] if "unit" in table else pd.Series([""] * len(table), index=table.index)
    return [f"{format_number(v)} {u}".strip() for v, u in zip(table[column], units, strict=True)]


def _row_pair_decimals(table: pd.DataFrame, has_iqr: bool) -> int:
    """One number of decimals for the RR column and, when shown, the RR per IQR column beside it.

    Both columns are the same kind of number in one row, so they share the decimals the narrowest of
    their intervals needs (:func:`~airhealth.report.numbers.rr_decimals`).
    """
    places = rr_decimals(table["rr_low"], table["rr_high"])
    if has_iqr:
        places = max(places, rr_decimals(table["rr_iqr_low"], table["rr_iqr_high"]))
    return places


def format_effects(
    table: pd.DataFrame,
    digits: int | None = None,
    *,
    level: float = 0.95,
    style: IntervalStyle = "to",
    labels: Labels | None = None,
) -> pd.DataFrame:
    """A display copy of an effects table: relative risks with intervals as text, by journal conventions.

    Parameters
    ----------
    table : DataFrame
        From :func:`effects_table` (``rr``, ``rr_low``, ``rr_high``, ``p_value``; optionally ``per`` and
        ``unit``, ``exposure_iqr`` and ``rr_iqr*``, ``dispersion``, ``qaic``, ``n_days``).
    digits : int, optional
        Decimals of the relative risks; by default chosen from the interval widths
        (:func:`~airhealth.report.numbers.rr_decimals`), one number for the whole column.
    level : float
        Confidence level named in the headings.
    style : {"to", "brackets", "dash"}
        How intervals are written (:data:`~airhealth.report.numbers.IntervalStyle`).
    labels : mapping, optional
        Display names of outcomes and exposures (:func:`~airhealth.report.labels.display_name`).
    """
    ci = f"{level:.0%} CI"
    names = [c for c in ("outcome", "exposure") if c in table]
    out = pd.DataFrame({c: table[c].map(lambda v: display_name(v, labels)) for c in names}, index=table.index)
    if "lag" in table:
        out["lag"] = table["lag"]
    if "per" in table:
        out["per"] = _per_text(table, "per")
    has_iqr = "exposure_iqr" in table and "rr_iqr" in table
    places = _row_pair_decimals(table, has_iqr) if digits is None else digits
    out[f"RR ({ci})"] = [
        format_rr(r, lo, hi, places, style)
        for r, lo, hi in zip(table["rr"], table["rr_low"], table["rr_high"], strict=True)
    ]
    pct = [(table[c].to_numpy(dtype=float) - 1) * 100 for c in ("rr", "rr_low", "rr_high")]
    pct_places = percent_decimals(pct[1], pct[2])
    out[f"% change ({ci})"] = [format_percent_change(*v, pct_places, style) for v in zip(*pct, strict=True)]
    if has_iqr:
        out["IQR"] = _per_text(table, "exposure_iqr")
        out[f"RR per IQR ({ci})"] = [
            format_rr(r, lo, hi, places, style)
            for r, lo, hi in zip(table["rr_iqr"], table["rr_iqr_low"], table["rr_iqr_high"], strict=True)
        ]
    out["p"] = table["p_value"].map(format_p)
    for c in ("dispersion", "qaic"):
        if c in table:
            out[c] = table[c].map(lambda v, places=FIXED_DECIMALS[c]: format_decimal(v, places))
    if "n_days" in table:
        out["days"] = table["n_days"]
    return out


def _whole(values: pd.Series) -> bool:
    """Every number in ``values`` is a whole number (text cells, such as suppression marks, are skipped)."""
    numbers = pd.to_numeric(values.map(lambda v: v if isinstance(v, (int, float, np.number)) else np.nan))
    finite = numbers[np.isfinite(numbers.astype(float))]
    return bool((finite == finite.round()).all())


def _formatter(name: str, values: pd.Series) -> Any:
    """The number formatter of a column, by its kind (p-values, coefficients, counts, other numbers)."""
    if name in P_COLUMNS:
        return format_p
    if name in FIXED_DECIMALS:
        return lambda v: format_decimal(v, FIXED_DECIMALS[name])
    if name in COEF_COLUMNS:
        return format_coef
    if (name in COUNT_COLUMNS or pd.api.types.is_integer_dtype(values)) and _whole(values):
        return format_count  # a "count" column holding fractions (days of a 12-hour gap) is not rounded
    return format_number


def _format_column(name: str, values: pd.Series) -> pd.Series:
    """Numbers as text by the column's kind; text (suppression marks, labels) and booleans pass through."""
    number = _formatter(name, values)
    stamps = values[values.map(lambda v: isinstance(v, pd.Timestamp) and not pd.isna(v))]
    with_time = bool(len(stamps)) and bool((stamps != stamps.map(lambda v: v.normalize())).any())
    stamp_format = "%Y-%m-%d %H:%M" if with_time else "%Y-%m-%d"  # one form for the whole column

    def one(v: Any) -> str:
        if v is None or isinstance(v, (str, bool, np.bool_)):
            return "" if v is None else str(v)
        if isinstance(v, (int, float, np.integer, np.floating)):
            return number(v)
        if isinstance(v, pd.Timestamp) and not pd.isna(v):
            return v.strftime(stamp_format)
        return "" if pd.isna(v) else str(v)

    return values.map(one).astype(object)


def _with_intervals(table: pd.DataFrame, level: float, style: IntervalStyle) -> pd.DataFrame:
    """A table with ``rr``, ``rr_low``, ``rr_high`` (per-lag effects, ...): the three shown as one column."""
    places = rr_decimals(table["rr_low"], table["rr_high"])
    shown = {}
    for c in table.columns:
        if c == "rr":
            shown[f"RR ({level:.0%} CI)"] = [
                format_rr(r, lo, hi, places, style)
                for r, lo, hi in zip(table["rr"], table["rr_low"], table["rr_high"], strict=True)
            ]
        elif c not in ("rr_low", "rr_high"):
            shown[c] = _format_column(str(c), table[c])
    return pd.DataFrame(shown, index=table.index)


def display_table(
    table: pd.DataFrame,
    labels: Labels | None = None,
    *,
    level: float = 0.95,
    style: IntervalStyle = "to",
    words: bool = True,
) -> pd.DataFrame:
    """The text view of any tidy table, as every display format (Markdown, HTML, LaTeX, Word) shows it.

    An effects table (columns ``rr``, ``rr_low``, ``rr_high``, ``p_value``) is shown by
    :func:`format_effects`; another table with ``rr``, ``rr_low`` and ``rr_high`` (per-lag effects) shows
    them as one "RR (CI)" column; every other column is formatted by its kind (p-values, per-unit
    coefficients, counts, fit statistics, other numbers; :mod:`airhealth.report.numbers`; dates in one
    form per column) and text passes through. Outcome and exposure names and column headings get their
    display names (``words=True``: the library's own column names read as words, e.g. ``n_days`` → "Days").
    """
    columns = set(table.columns)
    if {"rr", "rr_low", "rr_high", "p_value"} <= columns:
        shown = format_effects(table, level=level, style=style, labels=labels)
        if "days" in shown:
            shown["days"] = shown["days"].map(format_count)
    elif {"rr", "rr_low", "rr_high"} <= columns and len(table):
        shown = _with_intervals(table, level, style)
    else:
        shown = pd.DataFrame({c: _format_column(str(c), table[c]) for c in table.columns}, index=table.index)
    return label_frame(shown, labels, words=words)


def result_html(result: Any) -> str:
    """HTML summary of one fit for notebooks."""
    e = result.effect(per=10)
    spec = result.spec
    rows = [
        ("outcome", spec.outcome),
        ("exposure", f"{spec.exposure}, lag {spec.lag.label}"),
        (f"RR per 10 {spec.unit} (95% CI)", format_rr(e.rr, e.rr_low, e.rr_high)),
        ("percent change (95% CI)", format_percent_change(e.percent_change, e.percent_low, e.percent_high)),
        ("p-value", format_p(e.p_value)),
        ("family", spec.family),
        ("dispersion", f"{result.dispersion:.3f}"),
        ("QAIC", f"{result.qaic:,.1f}"),
        ("days used / dropped", f"{format_count(result.n_days)} / {format_count(len(result.dropped))}"),
        ("converged", f"{result.converged} ({result.n_iter} iterations)"),
    ]
    if getattr(result, "strata", None) is not None:
        rows.insert(5, ("design", f"time-stratified case-crossover, {result.strata['n_strata']} strata"))
    body = "".join(
        f"<tr><th style='text-align:left'>{html.escape(k)}</th><td>{html.escape(str(v))}</td></tr>" for k, v in rows
    )
    return f"<table><caption>airhealth fit</caption><tbody>{body}</tbody></table>"


def abbreviation_notes(columns: Iterable[object], lags: Iterable[object] = ()) -> list[str]:
    """One note for each code or abbreviation that a table's headings (and lag labels) use."""
    heads = " ".join(str(c) for c in columns)
    words = set(re.split(r"[\s(),]+", heads))
    notes = [text for key, text in _ABBREVIATIONS if key in words or (key == "% change" and key in heads)]
    lags = [str(lag) for lag in lags]
    if lags:
        notes.append(_LAG_NOTE)
        if any(lag.startswith("dl") for lag in lags):
            notes.append(_DL_NOTE)
    return notes


def table_notes(note: str | None, columns: Iterable[object], lags: Iterable[object] = ()) -> list[str]:
    """A table's notes: its own ``note``, then :func:`abbreviation_notes` not already said in it."""
    given = [note] if note else []
    return given + [n for n in abbreviation_notes(columns, lags) if n not in (note or "")]


_ABBREVIATIONS = (
    ("RR", "RR: relative risk (ratio of expected daily counts) for the exposure increase stated."),
    ("CI", "CI: confidence interval."),
    ("% change", "% change: (RR - 1) x 100."),
    ("IQR", "IQR: interquartile range of the exposure on the days each model used; RR per IQR is the relative "
     "risk for an increase of one IQR."),
    ("p", "p: two-sided Wald test of no association."),
    ("SD", "SD: standard deviation."),
    ("SE", "SE: standard error of the coefficient."),
    ("Coefficient", "Coefficient: log relative risk per unit of exposure (per µg/m³, ppb, ... as stated)."),
    ("df", "df: degrees of freedom."),
    ("QAIC", "QAIC: quasi-Akaike information criterion; compare only models fitted on the same days (left empty "
             "where the models of one outcome and exposure used different days: airhealth compare fits them on "
             "common days)."),
)  # fmt: skip
_LAG_NOTE = (
    "Lag: '0' the same day's exposure, '1' the day before's, '0-1' the mean over lags 0 to 1 (a moving average)."
)
_DL_NOTE = (
    "'dl0-5': a distributed lag over lags 0 to 5, its RR the cumulative effect of a rise sustained over the "
    "window (':poly3' a polynomial of degree 3, ':spline4' a natural spline with 4 df over the lags)."
)
