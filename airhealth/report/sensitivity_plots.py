"""The figure and the report section of a sensitivity analysis (:func:`airhealth.sensitivity`).

:func:`plot_sensitivity` draws each setting's relative risk with its interval, one line per setting grouped
by check, against the main model's estimate (a vertical line) and interval (a shaded band); the main model's
rows are filled squares, the other settings open circles, and a setting that could not be fitted is named
"not estimable". :func:`sensitivity_section` returns the report :class:`~airhealth.report.document.Section`
(text, the table and the figure).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from .document import CAUTION, Figure, Section, Table, Text
from .numbers import format_p, format_rr, rr_decimals
from .plots import new_axes, plain

__all__ = ["CHECK_LABELS", "plot_sensitivity", "sensitivity_section", "setting_labels"]

#: Plain names of the checks, for figures and tables.
CHECK_LABELS = {
    "main": "main model",
    "trend_df_per_year": "time trend",
    "temperature_df": "temperature spline",
    "temperature_lag_df": "lagged temperature spline",
    "temperature_lags": "temperature lags",
    "humidity": "humidity",
    "holidays": "holidays",
    "exclude_above_percentile": "left out",
    "exclude_periods": "period left out",
}
_MAIN_COLOUR, _OTHER_COLOUR, _BAND = "#1b4965", "#5fa8a0", "#dfe9ee"


def setting_labels(table: pd.DataFrame) -> list[str]:
    """One label per row of a sensitivity table: ``"time trend: 4 df/year"``; the main model's row as is."""
    return [
        "main model" if r.check == "main" else f"{CHECK_LABELS.get(r.check, r.check)}: {r.setting}"
        for r in table.itertuples()
    ]


def _per_label(table: pd.DataFrame) -> str:
    first = table.iloc[0]
    return f"{first['per']:g} {first['unit']}"


def plot_sensitivity(table: pd.DataFrame, level: float = 0.95, ax: Any = None) -> Any:
    """Relative risk and interval of each setting of a sensitivity table, the main model marked.

    Parameters
    ----------
    table : DataFrame
        The table of :func:`airhealth.sensitivity` (its first row the main model).
    level : float
        Confidence level of the intervals in the table (for the axis label).
    ax : matplotlib Axes, optional
        Where to draw; a new figure (not registered with pyplot) when ``None``.

    Returns
    -------
    matplotlib Axes
    """
    n = len(table)
    ax = new_axes(ax, (8.0, 0.32 * n + 1.4))
    y = np.arange(n)[::-1].astype(float)
    rr, lo, hi = (table[c].to_numpy(dtype=float) for c in ("rr", "rr_low", "rr_high"))
    main = table["is_main"].to_numpy(dtype=bool)
    ax.axvspan(lo[0], hi[0], color=_BAND, zorder=0)
    ax.axvline(rr[0], color=_MAIN_COLOUR, lw=1.0, zorder=1)
    ax.axvline(1.0, color="0.55", lw=0.8, ls=":", zorder=1)
    for marker, rows, face, colour in (("s", main, _MAIN_COLOUR, _MAIN_COLOUR), ("o", ~main, "white", _OTHER_COLOUR)):
        ok = rows & np.isfinite(rr)
        ax.hlines(y[ok], lo[ok], hi[ok], color=colour, lw=1.6, zorder=2)
        ax.plot(rr[ok], y[ok], marker, mfc=face, mec=colour, mew=1.4, ms=6, ls="none", zorder=3)
    for at in y[~np.isfinite(rr)]:
        ax.text(rr[0], at, "  not estimable", va="center", ha="left", fontsize=8, color="0.35", style="italic")
    checks = table["check"].to_numpy()
    for at in y[1:][checks[1:] != checks[:-1]]:  # a thin rule between groups of checks
        ax.axhline(at + 0.5, color="0.85", lw=0.6, zorder=0)
    ax.set_yticks(y, [plain(label) for label in setting_labels(table)])
    ax.set_ylim(-0.7, n - 0.3)
    ax.set_xlabel(plain(f"relative risk per {_per_label(table)} ({level:.0%} CI)"))
    ax.tick_params(axis="y", length=0)
    for side in ("top", "right", "left"):
        ax.spines[side].set_visible(False)
    return ax


def _display_table(table: pd.DataFrame, level: float) -> pd.DataFrame:
    places = rr_decimals(table["rr_low"], table["rr_high"])

    def interval(r: Any) -> str:
        if not np.isfinite(r.rr):
            return "not estimable"
        return format_rr(r.rr, r.rr_low, r.rr_high, places)

    return pd.DataFrame({
        "check": [CHECK_LABELS.get(c, c) for c in table["check"]],
        "setting": table["setting"],
        "main model": np.where(table["is_main"], "yes", ""),
        f"RR per {_per_label(table)} ({level:.0%} CI)": [interval(r) for r in table.itertuples()],
        "p": table["p_value"].map(format_p),
        "QAIC": table["qaic"].map(lambda v: "" if pd.isna(v) else f"{v:.1f}"),
        "days used": table["n_days"].map(lambda v: "" if pd.isna(v) else f"{int(v)}"),
        "days left out": table["n_excluded"],
        "error": table["error"].astype(object).where(table["error"].notna(), ""),
    })  # fmt: skip


def sensitivity_section(table: pd.DataFrame, level: float = 0.95, name: str = "sensitivity") -> Section:
    """The report section of a sensitivity table: what was varied, the table and the figure.

    The table and figure hold relative risks, QAIC and numbers of days, not health counts, so the
    small-count rules of :mod:`airhealth.report.suppression` have nothing to suppress here.
    """
    first = table.iloc[0]
    intro = (
        f"The main model ({first['outcome']} and {first['exposure']}, lag {first['lag']}) refitted with one "
        "setting changed at a time: the control of season and trend, of temperature, humidity and holidays, "
        "and with the most polluted days or named periods left out (their outcome treated as missing). An "
        "estimate that moves little across settings is robust to them; QAIC compares only models fitted on "
        "the same days. " + CAUTION
    )
    figure = plot_sensitivity(table, level=level).figure
    return Section(
        "Sensitivity analyses",
        [
            Text(intro),
            Table("Estimate under each setting", _display_table(table, level), name),
            Figure("Relative risk under each setting (main model: square, line and band)", figure, name),
        ],
    )
