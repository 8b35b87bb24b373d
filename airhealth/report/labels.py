"""Display names: the user's words for columns, outcomes and exposures in tables and figures.

``labels={"deaths_all": "All-cause deaths"}`` (``--label deaths_all="All-cause deaths"`` on the command
line) renames what the reader sees; the data, the CSV files' columns and the JSON keys keep the original
names. Tables (:mod:`airhealth.report.tables`, :mod:`airhealth.report.export`) and figures both go
through :func:`display_name`, so one label reads the same everywhere.
"""

from __future__ import annotations

from collections.abc import Mapping

import pandas as pd

from ..errors import SpecificationError

__all__ = ["Labels", "check_labels", "display_name", "label_frame"]

Labels = Mapping[str, str]

# Column names of the library's own tables, in words (applied unless the user labels them otherwise).
COLUMN_WORDS = {
    "outcome": "Outcome",
    "exposure": "Exposure",
    "lag": "Lag (days)",
    "per": "Per",
    "unit": "Unit",
    "n_days": "Days",
    "days": "Days",
    "p_value": "p",
    "dispersion": "Dispersion",
    "qaic": "QAIC",
    "reason": "Reason",
    "total": "Total",
    "mean": "Mean",
    "sd": "SD",
    "min": "Minimum",
    "p25": "25th percentile",
    "median": "Median",
    "p75": "75th percentile",
    "max": "Maximum",
    "p5": "5th percentile",
    "p50": "Median",
    "p95": "95th percentile",
    "iqr": "IQR",
    "variable": "Variable",
    "monitor": "Monitor",
    "hours": "Hours",
    "first_missing": "First missing",
    "last_missing": "Last missing",
    "lag_structure": "Lag structure",
    "coef": "Coefficient",
    "se": "SE",
    "error": "Error",
    "warning": "Warning",
}


def check_labels(labels: Labels | None) -> dict[str, str]:
    """``labels`` as a plain dict of str → str; anything else is refused naming the bad entry."""
    if labels is None:
        return {}
    if not isinstance(labels, Mapping):
        raise SpecificationError(
            f"labels must be a mapping of names to display names, e.g. {{'deaths_all': 'All-cause deaths'}}; "
            f"got {type(labels).__name__}."
        )
    for key, value in labels.items():
        if not isinstance(key, str) or not isinstance(value, str) or not value.strip():
            raise SpecificationError(
                f"labels[{key!r}] = {value!r}: each label must map a column name to a non-empty text, e.g. "
                "{'deaths_all': 'All-cause deaths'}."
            )
    return dict(labels)


def display_name(name: object, labels: Labels | None = None) -> str:
    """The display name of ``name``: the user's label if there is one, else the name itself.

    Examples
    --------
    >>> display_name("deaths_all", {"deaths_all": "All-cause deaths"})
    'All-cause deaths'
    >>> display_name("pm25", {"deaths_all": "All-cause deaths"})
    'pm25'
    """
    text = str(name)
    return (labels or {}).get(text, text)


def label_frame(frame: pd.DataFrame, labels: Labels | None = None, *, words: bool = True) -> pd.DataFrame:
    """A copy of ``frame`` for display: labelled column headings and labelled names in text cells.

    A text cell is replaced only when it equals a labelled name exactly (an outcome or exposure column);
    with ``words=True`` the library's own column names without a user label read as words (``n_days`` →
    "Days").
    """
    labels = check_labels(labels)
    out = frame.copy()
    text_columns = [c for c in out.columns if out[c].dtype == object or isinstance(out[c].dtype, pd.StringDtype)]
    if labels:
        for c in text_columns:
            out[c] = out[c].map(lambda v: labels.get(v, v) if isinstance(v, str) else v)
    out.columns = [
        labels[str(c)] if str(c) in labels else (COLUMN_WORDS.get(str(c), str(c)) if words else str(c))
        for c in out.columns
    ]
    return out
