"""Small-count suppression: the one place that decides how health counts below a threshold are shown.

Local disclosure rules often forbid publishing a count between 1 and some threshold (say 5 or 10): a
small number of deaths on one day can identify people. The user gives the threshold; ``None`` switches
suppression off. The rules, for every table and figure of a report:

- **a count** (a daily value, a minimum, a percentile of daily counts) from 1 to threshold − 1 is shown as
  ``<threshold``; zero is shown (common practice, no source);
- **a total, mean or SD** is shown as ``suppressed`` when the smallest positive count it was computed from
  is below the threshold (it could be differenced against other published figures to recover it);
- **a figure of daily counts** shows daily values only if no daily count is below the threshold; else
  weekly totals (calendar weeks, Monday to Sunday), else monthly totals, each only if none of its totals is
  below the threshold; else the observed series is left out. Only weeks or months whose every day was used
  are drawn (a partly covered period's total would dip for lack of days, not of events, and could be small);
  how many periods were left out for that is said in the figure's note, with which resolution was drawn;
- **messages** (failed analyses, warnings) that name an outcome column show every number from above 0 to
  threshold − 1 as ``<threshold`` (a quartile, a mean or a count of the outcome could be small); dates stay.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
import pandas as pd

from ..errors import SpecificationError

__all__ = [
    "SUPPRESSED",
    "CountSeries",
    "check_threshold",
    "counts_for_figure",
    "has_small",
    "is_small",
    "mask_small_numbers",
    "smallest_positive",
    "suppress_table",
    "suppression_note",
]

Resolution = Literal["daily", "weekly", "monthly", "omitted"]
SUPPRESSED = "suppressed"
_PERIODS = {"weekly": "W-SUN", "monthly": "M"}


def check_threshold(threshold: object) -> int | None:
    """Return the threshold if it is None or a whole number of at least 1, else SpecificationError."""
    if threshold is None:
        return None
    if isinstance(threshold, bool) or not isinstance(threshold, (int, np.integer)) or threshold < 1:
        raise SpecificationError(
            f"the small-count threshold must be a whole number of at least 1 (counts below it are hidden), "
            f"not {threshold!r}; for example 5 or 10, as local disclosure rules require."
        )
    return int(threshold)


def is_small(values: object, threshold: int | None) -> np.ndarray:
    """Boolean array: which ``values`` are counts from 1 to ``threshold − 1`` (never, if no threshold)."""
    threshold = check_threshold(threshold)
    v = pd.to_numeric(pd.Series(np.asarray(values, dtype=object).ravel()), errors="coerce").to_numpy(dtype=float)
    if threshold is None:
        return np.zeros(v.shape, dtype=bool)
    with np.errstate(invalid="ignore"):
        return (v > 0) & (v < threshold)


def has_small(values: object, threshold: int | None) -> bool:
    """True if any of ``values`` is a count from 1 to ``threshold − 1``."""
    return bool(is_small(values, threshold).any())


def smallest_positive(data: pd.DataFrame, columns: Sequence[str]) -> tuple[float, ...]:
    """The smallest count above zero in each column (NaN where there is none): what a total hides."""
    out = []
    for col in columns:
        v = pd.to_numeric(data[col], errors="coerce")
        v = v[v > 0]
        out.append(float(v.min()) if len(v) else float("nan"))
    return tuple(out)


def suppression_note(threshold: int | None) -> str:
    """The sentence a report shows once to explain the suppression (empty without a threshold)."""
    if threshold is None:
        return ""
    return (
        f"Counts from 1 to {threshold - 1} are shown as '<{threshold}'; totals, means and SDs of counts that "
        f"include such a count are shown as '{SUPPRESSED}'; figures of daily counts show weekly or monthly "
        f"totals instead, or leave the counts out, as their notes say."
    )


def suppress_table(
    frame: pd.DataFrame,
    threshold: int | None,
    *,
    counts: Sequence[str] = (),
    aggregates: Sequence[str] = (),
    smallest: Sequence[float] = (),
    rows: Sequence[bool] | None = None,
) -> pd.DataFrame:
    """A copy of ``frame`` with small counts and the totals that contain them replaced by text.

    Parameters
    ----------
    frame : DataFrame
        The table (not modified).
    threshold : int or None
        Counts from 1 to ``threshold − 1`` are small; ``None`` returns ``frame`` unchanged.
    counts : sequence of str
        Columns whose cells are counts: small ones become ``"<threshold"``.
    aggregates : sequence of str
        Columns of totals, means or SDs computed from counts: a row's cells become ``"suppressed"`` when
        that row's ``smallest`` positive contributing count is small.
    smallest : sequence of float
        Per row of ``frame``, the smallest positive count behind its aggregates (NaN: none). When not
        given, every aggregate is suppressed (the safe default).
    rows : sequence of bool, optional
        Only these rows hold counts (e.g. the outcome rows of a table of many variables); default all.
    """
    if threshold is None:
        return frame
    out = frame.copy()
    mask = np.ones(len(out), dtype=bool) if rows is None else np.asarray(rows, dtype=bool)
    for col in (c for c in counts if c in out):
        small = is_small(out[col].to_numpy(), threshold) & mask
        out[col] = out[col].astype(object).where(~small, f"<{threshold}")
    if aggregates:
        hidden = is_small(smallest, threshold) if len(smallest) else np.ones(len(out), dtype=bool)
        for col in (c for c in aggregates if c in out):
            out[col] = out[col].astype(object).where(~(hidden & mask), SUPPRESSED)
    return out


@dataclass(frozen=True)
class CountSeries:
    """Daily counts prepared for a figure under the suppression rule.

    Attributes
    ----------
    resolution : {"daily", "weekly", "monthly", "omitted"}
        What may be drawn; "omitted": the observed counts must not be drawn at all.
    observed : Series
        Counts (or totals) to draw, indexed by the middle of each period; empty when omitted.
    alongside : Series or None
        A companion series (fitted means) summed over the same days and periods, for comparison.
    note : str
        A sentence saying what is drawn and why ("" for unsuppressed daily counts).
    """

    resolution: Resolution
    observed: pd.Series
    alongside: pd.Series | None
    note: str


def _totals(series: pd.Series, resolution: Resolution) -> pd.Series:
    """Totals over the periods of ``resolution`` whose every day is in ``series`` (complete periods only)."""
    if resolution == "daily":
        return series
    periods = pd.DatetimeIndex(series.index).to_period(_PERIODS[resolution])
    grouped = series.groupby(periods)
    sums, present = grouped.sum(), grouped.size()
    start, end = sums.index.start_time, sums.index.end_time
    length = ((end.normalize() - start.normalize()) / pd.Timedelta(days=1)).to_numpy().round().astype(int) + 1
    complete = present.to_numpy() == length
    middle = (start + (end - start) / 2).floor("D")
    return pd.Series(sums.to_numpy()[complete], index=middle[complete], name=series.name)


def _partial_note(series: pd.Series, totals: pd.Series, resolution: Resolution) -> str:
    """How many periods of ``series`` were not drawn because the days used do not cover them fully."""
    periods = pd.DatetimeIndex(series.index).to_period(_PERIODS[resolution])
    left_out = periods.nunique() - len(totals)
    if not left_out:
        return ""
    word = "week" if resolution == "weekly" else "month"
    return f" {left_out} {word}(s) not fully covered by the days used are not drawn."


def counts_for_figure(observed: pd.Series, threshold: int | None, *, alongside: pd.Series | None = None) -> CountSeries:
    """Apply the figure rule of this module to daily ``observed`` counts indexed by date.

    ``alongside`` (e.g. fitted means on the same days) is aggregated exactly like the observed counts.
    """
    observed = observed.dropna()
    if alongside is not None:
        alongside = alongside.reindex(observed.index)
    if not has_small(observed.to_numpy(), threshold):
        return CountSeries("daily", observed, alongside, "")
    reason = f"some daily counts are below {threshold}"
    for resolution in ("weekly", "monthly"):
        totals = _totals(observed, resolution)  # type: ignore[arg-type]
        if len(totals) and not has_small(totals.to_numpy(), threshold):
            period = "weeks, Monday to Sunday" if resolution == "weekly" else "calendar months"
            note = f"Shown as {resolution} totals ({period}) because {reason}." + _partial_note(
                observed, totals, resolution
            )
            other = None if alongside is None else _totals(alongside, resolution)  # type: ignore[arg-type]
            return CountSeries(resolution, totals, other, note)  # type: ignore[arg-type]
        reason += f" and some {resolution} totals too"
    other = None if alongside is None else _totals(alongside, "monthly")
    note = f"Observed counts are left out because {reason}."
    if other is not None:
        note += " The line shows fitted monthly totals."
    return CountSeries("omitted", observed.iloc[:0], other, note)


_NUMBER = re.compile(r"(?<![\w.:-])(\d+(?:\.\d+)?)(?![\w.:-]*\d{2}-\d{2})(?![\w-])")


def mask_small_numbers(text: str, outcomes: Sequence[str], threshold: int | None) -> str:
    """``text`` with numbers from above 0 to ``threshold`` − 1 written ``<threshold`` when it names an outcome.

    Messages about a count column can quote its quartiles, mean or a count; under a disclosure threshold
    they follow the table rule. Dates (``2010-04-11``) and texts not naming an outcome are left as they are.
    """
    if threshold is None or not any(o in text for o in outcomes):
        return text

    def small(match: re.Match[str]) -> str:
        value = float(match.group(1))
        return f"<{threshold}" if 0 < value < threshold else match.group(1)

    return _NUMBER.sub(small, text)
