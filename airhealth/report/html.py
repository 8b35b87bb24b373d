"""Write a report (sections of text, tables and figures) as a self-contained HTML page.

Tables are also written as CSV and figures as PNG beside the page. Health counts in tables are suppressed
below the user's disclosure threshold. Every report carries the caution that results are associations.
Nothing is sent anywhere: everything is written to the local output folder, which appears whole or not at
all. File names derived from user text are made safe in :mod:`airhealth.report.safe_names`; every piece
of text in the page is HTML-escaped here.
"""

from __future__ import annotations

import datetime as _dt
import html
from collections.abc import Sequence
from pathlib import Path
from typing import get_args

import pandas as pd

from .. import _io
from .document import CAUTION, Figure, Section, Table, Text
from .export import TableFormat, export_table, parse_formats
from .labels import Labels
from .safe_names import file_in
from .suppression import check_threshold, suppress_table, suppression_note
from .tables import display_table, table_notes

__all__ = ["write_html_report"]

_GENERATOR = "<meta name='generator' content='airhealth'>"
_STYLE = """
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;max-width:1080px;margin:2em auto;padding:0 1em;
color:#1d2430;line-height:1.45}
h1{font-size:1.6em;margin-bottom:.2em}h2{border-bottom:1px solid #d0d5dd;padding-bottom:.2em;margin-top:2em}
table{border-collapse:collapse;margin:.6em 0 1.2em;font-size:.9em}
th,td{border-bottom:1px solid #e4e7ec;padding:.25em .6em;text-align:right}
th:first-child,td:first-child{text-align:left}thead th{background:#f2f4f7}
.caution{background:#fff8e6;border-left:4px solid #d99a00;padding:.6em 1em}
.note{color:#475467;font-size:.88em}figure{margin:1em 0}figure img{max-width:100%}
"""


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


def _figure_html(block: Figure, path: Path) -> str:
    _io.write_with(path, lambda tmp: block.figure.savefig(tmp, dpi=110, format="png"))
    note = f"<p class='note'>{_e(block.note)}</p>" if block.note else ""
    src = f"{path.parent.name}/{path.name}"
    return (
        f"<figure><img src='{_e(src)}' alt='{_e(block.title)}'>"
        f"<figcaption>{_e(block.title)}</figcaption></figure>{note}"
    )


_LEFT_BY_FILE_BROWSERS = frozenset({".DS_Store", "Thumbs.db", "desktop.ini"})
_REPORT_PARTS = {"tables": tuple(f".{f}" for f in get_args(TableFormat)), "figures": (".png",)}


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


def _page(
    sections: Sequence[Section],
    out: Path,
    title: str,
    threshold: int | None,
    subtitle: str,
    table_formats: Sequence[str] = (),
    labels: Labels | None = None,
) -> str:
    caution = f"<p class='caution'><strong>Caution.</strong> {_e(CAUTION)}</p>"
    parts = [f"<h1>{_e(title)}</h1>"]
    if subtitle:
        parts.append(f"<p class='note'>{_e(subtitle)}</p>")
    parts.append(caution)
    if threshold is not None:
        parts.append(f"<p class='note'>Counts below {threshold} are suppressed. {_e(suppression_note(threshold))}</p>")
    tables, figures = _FileNames(out / "tables"), _FileNames(out / "figures")
    for section in sections:
        parts.append(f"<h2>{_e(section.title)}</h2>")
        for block in section.blocks:
            if isinstance(block, Text):
                parts.append(f"<p>{_e(block.text)}</p>")
            elif isinstance(block, Table):
                path = tables.take(block.name, ".csv")
                markup, shown = _table_html(block, threshold, path, labels)
                _write_table(block, shown, path, table_formats, labels)
                parts.append(markup)
            elif isinstance(block, Figure):
                parts.append(_figure_html(block, figures.take(block.name, ".png")))
    stamp = _dt.datetime.now().strftime("%Y-%m-%d %H:%M")
    parts.append(caution)
    parts.append(
        f"<p class='note'>Written by airhealth on {stamp}. Everything in this report was computed "
        "locally; no data were sent anywhere.</p>"
    )
    return (
        f"<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>{_GENERATOR}"
        f"<title>{_e(title)}</title><style>{_STYLE}</style></head><body>" + "\n".join(parts) + "</body></html>"
    )


def write_html_report(
    sections: Sequence[Section],
    out_dir: str | Path,
    title: str = "airhealth report",
    small_count_threshold: int | None = None,
    subtitle: str = "",
    table_formats: str | Sequence[str] = ("csv",),
    labels: Labels | None = None,
) -> Path:
    """Write ``index.html`` with every section, plus ``tables/*.csv`` and ``figures/*.png``.

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

    Returns
    -------
    Path
        The path of ``index.html``.
    """
    check_threshold(small_count_threshold)
    formats = parse_formats(table_formats)
    with _io.atomic_directory(out_dir, foreign_entries=_not_from_a_report) as tmp:
        page = _page(sections, tmp, title, small_count_threshold, subtitle, formats, labels)
        _io.write_text(tmp / "index.html", page)
    return Path(out_dir) / "index.html"
