"""The building blocks of a written report: sections made of text, tables and figures.

Report content is assembled as plain values (``Section`` holding ``Text``, ``Table`` and ``Figure`` blocks)
by the functions that know the statistics; writers (HTML, and later LaTeX) only lay them out. This keeps
each report section testable without writing any file.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import pandas as pd

__all__ = ["CAUTION", "Figure", "Section", "Table", "Text"]

CAUTION = (
    "These results are statistical associations estimated from observational time series; they are not "
    "proof of causation. They inform, but do not replace, expert review, local regulation and licensed "
    "public-health practice."
)


@dataclass(frozen=True)
class Text:
    """A paragraph of plain text."""

    text: str


@dataclass(frozen=True)
class Table:
    """A table; ``name`` names the CSV file the table is also written to (made safe by the writer).

    Health counts are suppressed by writers below the user's disclosure threshold, by the rules of
    :mod:`airhealth.report.suppression`: ``count_columns`` hold counts (each cell judged alone);
    ``aggregate_columns`` hold totals, means or SDs of counts, judged by ``smallest_counts`` (per row, the
    smallest positive count they were computed from; when empty, aggregates are always suppressed).
    """

    title: str
    frame: pd.DataFrame
    name: str
    note: str | None = None
    count_columns: tuple[str, ...] = ()
    aggregate_columns: tuple[str, ...] = ()
    smallest_counts: tuple[float, ...] = ()
    display: bool = True  # False: written as CSV and linked, not shown in the page


@dataclass(frozen=True)
class Figure:
    """A matplotlib figure; ``name`` names its PNG (300 dpi) and SVG files (made safe by the writer); the page
    embeds the SVG."""

    title: str
    figure: Any
    name: str
    note: str | None = None


@dataclass(frozen=True)
class Section:
    """A titled section: an ordered list of ``Text``, ``Table`` and ``Figure`` blocks."""

    title: str
    blocks: list[Text | Table | Figure] = field(default_factory=list)
