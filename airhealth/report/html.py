"""Write a report (sections of text, tables and figures) as a self-contained HTML page.

``index.html`` opens offline in any browser: its figures are embedded as SVG data URIs and its style sheet
is inline; it makes no external request (no fonts, scripts or styles from elsewhere). It has a table of
contents, the sections in the order given, the caution text at the top and bottom, the QAIC caveat under
every table or text mentioning QAIC, and print rules so that it reads well printed to PDF. The page layout
is the Jinja2 template of :mod:`airhealth.report.html_page` (autoescaped). Tables are also written as CSV
and figures as PNG (300 dpi) and SVG under ``figures/`` for reuse. Health counts in tables are suppressed
below the user's disclosure threshold. Every report carries the caution that results are associations.
Nothing is sent anywhere: everything is written to the local output folder, which appears whole or not at
all. File names derived from user text are made safe in :mod:`airhealth.report.safe_names`; every piece
of text in the page is HTML-escaped here.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import io
from collections.abc import Sequence
from pathlib import Path
from typing import get_args

import pandas as pd

from .. import _io
from .document import CAUTION, Figure, Section, Table, Text
from .export import TableFormat, export_table, parse_formats
from .html_page import render_page
from .labels import Labels
from .safe_names import file_in
from .suppression import check_threshold, suppress_table, suppression_note
from .tables import display_table, table_notes

__all__ = ["FIGURE_DPI", "QAIC_CAVEAT", "write_html_report"]

_GENERATOR = "<meta name='generator' content='airhealth'>"
FIGURE_DPI = 300  # the PNG files written for reuse (print resolution)

QAIC_CAVEAT = (
    "QAIC (the quasi-likelihood Akaike information criterion) compares models of the same outcome fitted on the "
    "same days only: rows with different day counts are not comparable. A lower QAIC is a guide to fit, not a "
    "test, and says nothing about whether an association is causal."
)


def _e(text: object) -> str:
    """User text made safe inside HTML elements and quoted attributes (``& < > " '`` escaped)."""
    return html.escape(str(text), quote=True)


class _FileNames:
    """Safe, distinct file names within one report folder (a repeated name gets ``-2``, ``-3``, ...)."""

    def __init__(self, folder: Path) -> None:
        self.folder = folder
        self.used: set[str] = set()

    def take(self, name: str, suffix: str) -> Path:
        path = file_in(self.folder, name, suffix)
        n = 1
        while path.name in self.used:
            n += 1
            path = file_in(self.folder, f"{name}-{n}", suffix)
        self.used.add(path.name)
        return path


def _link(path: Path, text: str) -> str:
    href = f"{path.parent.name}/{path.name}"
    return f"<a href='{_e(href)}'>{_e(text)}</a>"


def _table_html(
    block: Table, threshold: int | None, path: Path, labels: Labels | None = None
) -> tuple[str, pd.DataFrame]:
    frame = suppress_table(
        block.frame,
        threshold,
        counts=block.count_columns,
        aggregates=block.aggregate_columns,
        smallest=block.smallest_counts,
    )
    if not block.display:
        return f"<p class='note'>{_e(block.title)}: {_link(path, path.name)}</p>", frame
    shown = display_table(frame, labels)
    body = shown.to_html(index=False, border=0, na_rep="", escape=True)
    notes = table_notes(block.note, shown.columns, frame["lag"].dropna().unique() if "lag" in frame else ())
    note = "".join(f"<p class='note'>{_e(n)}</p>" for n in notes)
    return f"<h3>{_e(block.title)}</h3>{body}{note}<p class='note'>{_link(path, path.name)}</p>", frame


def _mentions_qaic(block: Text | Table) -> bool:
    if isinstance(block, Text):
        return "qaic" in block.text.lower()
    return any("qaic" in str(c).lower() for c in block.frame.columns) and block.display


def _figure_html(block: Figure, png: Path, svg: Path) -> str:
    """Write the figure's PNG (300 dpi) and SVG files; embed the SVG in the page as a data URI."""
    _io.write_with(png, lambda tmp: block.figure.savefig(tmp, dpi=FIGURE_DPI, format="png"))
    buffer = io.BytesIO()
    block.figure.savefig(buffer, format="svg", metadata={"Date": None})
    _io.write_with(svg, lambda tmp: tmp.write_bytes(buffer.getvalue()))
    uri = "data:image/svg+xml;base64," + base64.b64encode(buffer.getvalue()).decode("ascii")
    note = f"<p class='note'>{_e(block.note)}</p>" if block.note else ""
    files = f"{_link(png, 'PNG, 300 dpi')} · {_link(svg, 'SVG')}"
    return (
        f"<figure><img src='{uri}' alt='{_e(block.title)}'>"
        f"<figcaption>{_e(block.title)} <span class='files'>({files})</span></figcaption></figure>{note}"
    )


_LEFT_BY_FILE_BROWSERS = frozenset({".DS_Store", "Thumbs.db", "desktop.ini"})
_REPORT_PARTS = {"tables": tuple(f".{f}" for f in get_args(TableFormat)), "figures": (".png", ".svg")}


def _not_from_a_report(folder: Path) -> list[str]:
    """What in ``folder`` an earlier report of this module did not write (nothing: safe to replace)."""
    foreign = []
    for entry in sorted(folder.iterdir()):
        if entry.name in _LEFT_BY_FILE_BROWSERS:
            continue
        if entry.name in _REPORT_PARTS and entry.is_dir():
            suffix = _REPORT_PARTS[entry.name]
            foreign += [f"{entry.name}/{p.name}" for p in sorted(entry.iterdir()) if not p.name.endswith(suffix)]
        elif entry.name == "index.html" and entry.is_file():
            page = entry.read_text(encoding="utf-8", errors="replace")
            if _GENERATOR not in page and "Written by airhealth on" not in page:  # 2nd: reports before the marker
                foreign.append("index.html (not an airhealth report)")
        else:
            foreign.append(entry.name)
    return foreign


def _write_table(
    block: Table, shown: pd.DataFrame, path: Path, formats: Sequence[str], labels: Labels | None = None
) -> None:
    """The table's CSV (as shown, after suppression) and its other requested formats beside it."""
    path.parent.mkdir(parents=True, exist_ok=True)
    notes = [block.note] if block.note else []
    export_table(shown, path, ["csv", *formats], caption=block.title, notes=notes, labels=labels)


def _blocks_html(
    section: Section,
    threshold: int | None,
    tables: _FileNames,
    figures: _FileNames,
    table_formats: Sequence[str] = (),
    labels: Labels | None = None,
) -> list[str]:
    """The markup of one section's blocks (each already escaped); files written as a side effect."""
    parts = []
    for block in section.blocks:
        if isinstance(block, Text):
            parts.append(f"<p>{_e(block.text)}</p>")
        elif isinstance(block, Table):
            path = tables.take(block.name, ".csv")
            markup, shown = _table_html(block, threshold, path, labels)
            _write_table(block, shown, path, table_formats, labels)
            parts.append(markup)
        elif isinstance(block, Figure):
            png = figures.take(block.name, ".png")
            parts.append(_figure_html(block, png, png.with_suffix(".svg")))
        if isinstance(block, Text | Table) and _mentions_qaic(block):
            parts.append(f"<p class='note qaic'>{_e(QAIC_CAVEAT)}</p>")
    return parts


def _page(
    sections: Sequence[Section],
    out: Path,
    title: str,
    threshold: int | None,
    subtitle: str,
    table_formats: Sequence[str] = (),
    labels: Labels | None = None,
    caution: str = CAUTION,
) -> str:
    tables, figures = _FileNames(out / "tables"), _FileNames(out / "figures")
    rendered = [
        {
            "id": f"section-{i}",
            "title": section.title,
            "body": "\n".join(_blocks_html(section, threshold, tables, figures, table_formats, labels)),
        }
        for i, section in enumerate(sections, start=1)
    ]
    return render_page(
        title=title,
        subtitle=subtitle,
        caution=caution,
        suppression=f"Counts below {threshold} are suppressed. {suppression_note(threshold)}"
        if threshold is not None
        else "",
        sections=rendered,
        stamp=_dt.datetime.now().strftime("%Y-%m-%d %H:%M"),
        generator=_GENERATOR,
    )


def write_html_report(
    sections: Sequence[Section],
    out_dir: str | Path,
    title: str = "airhealth report",
    small_count_threshold: int | None = None,
    subtitle: str = "",
    table_formats: str | Sequence[str] = ("csv",),
    labels: Labels | None = None,
    caution: str = CAUTION,
) -> Path:
    """Write ``index.html`` with every section, plus ``tables/*.csv`` and ``figures/*.png`` / ``*.svg``.

    The whole folder is written beside ``out_dir`` under a temporary name and renamed into place only when
    everything succeeded (:func:`airhealth._io.atomic_directory`): a failed run leaves no half-written
    report, and an existing report in ``out_dir`` is replaced only on success. File names come from the
    blocks' names through :func:`~airhealth.report.safe_names.safe_stem`, so no user text can place a file
    outside the folder; all text in the page is HTML-escaped.

    Parameters
    ----------
    sections : sequence of Section
        Report content.
    out_dir : path
        Output folder. If it exists it must be empty or hold an earlier airhealth report (which is
        replaced); a folder holding anything else is refused with :class:`~airhealth.errors.DataError`.
    title, subtitle : str
        Page heading.
    small_count_threshold : int or None
        Health counts in the tables are suppressed below this threshold in the page and the CSV files
        (rules: :mod:`airhealth.report.suppression`). ``None`` disables suppression. Figures are drawn by
        the section builders, which apply the same rules with the same threshold.
    table_formats : str or sequence of {"csv", "md", "html", "tex", "docx"}
        Formats of every table under ``tables/`` (``"csv,md,tex,docx"`` or a list; the CSV is always
        written): :func:`~airhealth.report.export.export_table`.
    labels : mapping, optional
        Display names of columns, outcomes and exposures in the page and the display formats (the CSV
        files keep the names): :func:`~airhealth.report.labels.display_name`.
    caution : str
        The caution text at the top and bottom of the page (default: results are associations).

    Returns
    -------
    Path
        The path of ``index.html``.
    """
    check_threshold(small_count_threshold)
    formats = parse_formats(table_formats)
    with _io.atomic_directory(out_dir, foreign_entries=_not_from_a_report) as tmp:
        page = _page(sections, tmp, title, small_count_threshold, subtitle, formats, labels, caution)
        _io.write_text(tmp / "index.html", page)
    return Path(out_dir) / "index.html"
