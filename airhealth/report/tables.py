"""Tidy effect tables and their text/HTML/Markdown views.

Tables are plain DataFrames (one row per model); formatting into strings happens only here, so numbers
stay numbers for anyone who wants to compute with them.
"""

from __future__ import annotations

import html
from collections.abc import Iterable
from typing import Any

import pandas as pd

from ..model.result import SUMMARY_COLUMNS

__all__ = ["effects_table", "format_effects", "result_html"]

EFFECT_COLUMNS = [c for c in SUMMARY_COLUMNS if c not in ("coef", "se")]


def effects_table(results: Iterable[Any], per: float = 10.0, level: float = 0.95) -> pd.DataFrame:
    """One row per fitted model: the effect per ``per`` units and fit statistics."""
    rows = [r.to_dict(per=per, level=level) for r in results]
    frame = pd.DataFrame(rows)
    cols = [c for c in [*EFFECT_COLUMNS, "coef", "se", "interval"] if c in frame.columns]
    return frame[cols]


def format_effects(table: pd.DataFrame, digits: int = 3) -> pd.DataFrame:
    """A display copy: 'RR (95% CI)' as text, p-values to 3 significant digits."""
    out = pd.DataFrame({c: table[c] for c in ("outcome", "exposure", "lag") if c in table})
    out["RR (95% CI)"] = [
        f"{r:.{digits}f} ({lo:.{digits}f} to {hi:.{digits}f})"
        for r, lo, hi in zip(table["rr"], table["rr_low"], table["rr_high"], strict=True)
    ]
    out["% change"] = table["percent_change"].map(lambda v: f"{v:.2f}")
    out["p"] = table["p_value"].map(lambda v: f"{v:.3g}")
    for c in ("dispersion", "qaic"):
        if c in table:
            out[c] = table[c].map(lambda v: f"{v:.2f}")
    if "n_days" in table:
        out["days"] = table["n_days"]
    return out


def result_html(result: Any) -> str:
    """HTML summary of one fit for notebooks."""
    e = result.effect(per=10)
    spec = result.spec
    rows = [
        ("outcome", spec.outcome),
        ("exposure", f"{spec.exposure}, lag {spec.lag.label}"),
        (f"RR per 10 {spec.unit} (95% CI)", f"{e.rr:.4f} ({e.rr_low:.4f} to {e.rr_high:.4f})"),
        ("percent change", f"{e.percent_change:.2f}%"),
        ("p-value", f"{e.p_value:.3g}"),
        ("family", spec.family),
        ("dispersion", f"{result.dispersion:.3f}"),
        ("QAIC", f"{result.qaic:.1f}"),
        ("days used / dropped", f"{result.n_days} / {len(result.dropped)}"),
        ("converged", f"{result.converged} ({result.n_iter} iterations)"),
    ]
    if getattr(result, "strata", None) is not None:
        rows.insert(5, ("design", f"time-stratified case-crossover, {result.strata['n_strata']} strata"))
    body = "".join(
        f"<tr><th style='text-align:left'>{html.escape(k)}</th><td>{html.escape(str(v))}</td></tr>" for k, v in rows
    )
    return f"<table><caption>airhealth fit</caption><tbody>{body}</tbody></table>"
