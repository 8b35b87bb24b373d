"""The notebook view of :class:`~airhealth.studies.diagnostics.Diagnostics`: verdict, dispersion and the
largest residual autocorrelations as small HTML tables, every text escaped.

Numbers go through :mod:`airhealth.report.numbers` (dispersion 2 decimals, autocorrelations 3).
"""

from __future__ import annotations

import html
from typing import Any

import pandas as pd

from .numbers import format_decimal

__all__ = ["diagnostics_html", "top_autocorrelations"]

TOP_LAGS = 3  # autocorrelations shown: the largest in absolute value (common practice, no source)


def top_autocorrelations(diagnostics: Any, n: int = TOP_LAGS) -> pd.DataFrame:
    """The ``n`` residual autocorrelations largest in absolute value: ``lag``, ``acf``, ``pacf``, and whether
    each lies outside the white-noise band ``±1.96/√n`` (``outside_band``)."""
    acf = diagnostics.autocorrelation
    acf = acf[acf["lag"] > 0].dropna(subset=["acf"])
    top = acf.reindex(acf["acf"].abs().sort_values(ascending=False).index).head(n)
    out = top[["lag", "acf", "pacf"]].reset_index(drop=True)
    return out.assign(outside_band=out["acf"].abs() > diagnostics.band)


def diagnostics_html(diagnostics: Any) -> str:
    """A small HTML view: a caption (model, dispersion, days), the verdict table and the top autocorrelations."""
    spec, result = diagnostics.result.spec, diagnostics.result
    caption = (
        f"Diagnostics of {spec.outcome} ~ {spec.exposure} lag {spec.lag.label}: dispersion "
        f"{format_decimal(diagnostics.dispersion, 2)} (Pearson χ² / residual df), {result.n_days} days"
    )
    verdict = diagnostics.verdict.to_html(index=False, escape=True, border=0)
    top = top_autocorrelations(diagnostics)
    shown = pd.DataFrame({
        "lag": top["lag"].astype(int),
        "autocorrelation": top["acf"].map(lambda v: format_decimal(v, 3)),
        "partial": top["pacf"].map(lambda v: format_decimal(v, 3)),
        "outside the band": top["outside_band"].map({True: "yes", False: "no"}),
    })  # fmt: skip
    band = f"Largest residual autocorrelations (white-noise band ±{format_decimal(diagnostics.band, 3)})"
    return (
        f"<p>{html.escape(caption)}</p>{verdict}"
        f"<p>{html.escape(band)}</p>{shown.to_html(index=False, escape=True, border=0)}"
    )
