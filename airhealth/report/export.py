"""One export function for every table: CSV, Markdown, HTML, LaTeX and Word from one tidy DataFrame.

The CSV file is the data: full precision, the original column names and values, for anyone computing
with it. The other formats show the same table for reading — numbers as text by journal conventions
(:mod:`airhealth.report.numbers`), display names (:mod:`airhealth.report.labels`), a caption and notes —
and therefore hold exactly the same text in every format. HTML and LaTeX are made by pandas' ``Styler``
(LaTeX with booktabs rules), Word by python-docx; only the Markdown pipe table is written here. User text
is escaped for each format, every file is written atomically (:mod:`airhealth._io`) and text is UTF-8.
"""

from __future__ import annotations

import html
import re
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Literal

import pandas as pd

from .. import _io
from .._choices import check_choice
from ..errors import DataError, SpecificationError
from .labels import Labels
from .numbers import IntervalStyle
from .safe_names import file_in
from .tables import display_table, table_notes

__all__ = ["TableFormat", "export_table", "latex_escape", "parse_formats"]

TableFormat = Literal["csv", "md", "html", "tex", "docx"]
ALL_FORMATS: tuple[str, ...] = ("csv", "md", "html", "tex", "docx")
NO_ROWS = "This table has no rows: nothing met its conditions."
WRAP_AT = 32  # characters: text columns with longer cells wrap (LaTeX p-columns, HTML max-width)

_LATEX_SPECIAL = {
    "\\": r"\textbackslash{}",
    "&": r"\&",
    "%": r"\%",
    "$": r"\$",
    "#": r"\#",
    "_": r"\_",
    "{": r"\{",
    "}": r"\}",
    "~": r"\textasciitilde{}",
    "^": r"\textasciicircum{}",
    "<": r"\textless{}",
    ">": r"\textgreater{}",
}  # fmt: skip  (< and > as commands: in the default OT1 font encoding the bare characters print as ¡ and ¿)


def latex_escape(text: object) -> str:
    r"""``text`` safe inside LaTeX: ``\ & % $ # _ { } ~ ^ < >`` escaped (captions, notes, cells, headings)."""
    return "".join(_LATEX_SPECIAL.get(ch, ch) for ch in str(text))


def parse_formats(formats: str | Iterable[str]) -> tuple[str, ...]:
    """``"csv,md"`` or ``["csv", "md"]`` → ``("csv", "md")``, each checked; repeats dropped, order kept."""
    items = formats.split(",") if isinstance(formats, str) else list(formats)
    chosen = tuple(dict.fromkeys(str(f).strip().lower().lstrip(".") for f in items if str(f).strip()))
    if not chosen:
        raise DataError(f"no table format given ({formats!r}); use some of {', '.join(ALL_FORMATS)}.")
    for f in chosen:
        check_choice("table format", f, TableFormat)
    return chosen


# -- the display formats -----------------------------------------------------------------------------------


_MARKDOWN_SPECIAL = re.compile(r"([\\|<*_`\[\]])")


def _markdown_cell(text: object) -> str:
    """One line of Markdown text: line breaks joined, ``&`` written ``&amp;`` (else a label holding
    ``&amp;`` would show as ``&``: CommonMark reads entity references), and ``\\ | < * _ ` [ ]``
    backslash-escaped so that a cell can neither end its column nor become markup (CommonMark: any ASCII
    punctuation may be escaped)."""
    return _MARKDOWN_SPECIAL.sub(r"\\\1", " ".join(str(text).split()).replace("&", "&amp;"))


def _markdown(shown: pd.DataFrame, caption: str, notes: Sequence[str]) -> str:
    lines = [f"**{_markdown_cell(caption)}**", ""] if caption else []
    lines.append("| " + " | ".join(_markdown_cell(c) for c in shown.columns) + " |")
    lines.append("|" + "|".join(":---" if i == 0 else "---:" for i in range(len(shown.columns))) + "|")
    lines += ["| " + " | ".join(_markdown_cell(v) for v in row) + " |" for row in shown.itertuples(index=False)]
    for note in notes:  # one paragraph each
        lines += ["", _markdown_cell(note)]
    return "\n".join(lines) + "\n"


def _styler(shown: pd.DataFrame, escape: Literal["html", "latex"]) -> pd.io.formats.style.Styler:
    if escape == "latex":  # our own escaping, which also covers < and > (pandas' leaves them bare)
        shown = shown.map(lambda v: latex_escape(v) if isinstance(v, str) else v)
        shown.columns = [latex_escape(c) for c in shown.columns]
        return shown.style.hide(axis="index").set_uuid("airhealth")
    styler = shown.style.hide(axis="index").format(escape=escape).format_index(escape=escape, axis=1)
    return styler.set_uuid("airhealth")


def _html(shown: pd.DataFrame, caption: str, notes: Sequence[str]) -> str:
    styler = _styler(shown, "html")
    if caption:
        styler = styler.set_caption(html.escape(caption))
    body = re.sub(r"<style type=\"text/css\">\s*</style>\s*", "", styler.to_html())  # Styler's empty block
    notes_html = "".join(f"<p class='note'>{html.escape(n)}</p>" for n in notes)
    style = (
        "body{font-family:system-ui,sans-serif}table{border-collapse:collapse}"
        "th,td{padding:.2em .6em;text-align:right;vertical-align:top;max-width:24em;overflow-wrap:anywhere}"
        "th:first-child,td:first-child{text-align:left}thead th{border-bottom:1px solid #444}"
        "caption{font-weight:bold;text-align:left}.note{font-size:.9em}"
    )
    return (
        "<!DOCTYPE html><html><head><meta charset='utf-8'><meta name='generator' content='airhealth'>"
        f"<title>{html.escape(caption or 'table')}</title><style>{style}</style></head><body>"
        f"{body}{notes_html}</body></html>\n"
    )


def _column_format(shown: pd.DataFrame) -> str:
    """``l`` for the first column, ``r`` for the others; ``p{...}`` (wrapping) for columns of long text."""
    spec = []
    for i, c in enumerate(shown.columns):
        longest = max([len(str(c)), *(len(str(v)) for v in shown[c])])
        if longest > WRAP_AT:
            spec.append(r"p{5cm}")
        else:
            spec.append("l" if i == 0 else "r")
    return "".join(spec)


def _latex(shown: pd.DataFrame, caption: str, notes: Sequence[str]) -> str:
    styler = _styler(shown, "latex")
    body = styler.to_latex(
        hrules=True, column_format=_column_format(shown), caption=latex_escape(caption) if caption else None,
        position="htbp", environment="table",
    )  # fmt: skip
    if notes:
        text = " ".join(latex_escape(n) for n in notes)
        body = body.replace("\\end{table}", f"\\par\\smallskip{{\\footnotesize {text}\\par}}\n\\end{{table}}")
    header = (
        "% Table written by airhealth. Needs \\usepackage{booktabs} and, with pdfLaTeX,\n"
        "% \\usepackage[utf8]{inputenc} and \\usepackage[T1]{fontenc} (the text is UTF-8).\n"
    )
    return header + body


def _docx(shown: pd.DataFrame, caption: str, notes: Sequence[str], path: Path) -> None:
    import docx  # python-docx

    document = docx.Document()
    if caption:
        document.add_paragraph().add_run(caption).bold = True
    grid = document.add_table(rows=1, cols=len(shown.columns))
    grid.style = "Table Grid"
    for cell, name in zip(grid.rows[0].cells, shown.columns, strict=True):
        cell.text = str(name)
        for run in cell.paragraphs[0].runs:
            run.bold = True
    for row in shown.itertuples(index=False):
        for cell, value in zip(grid.add_row().cells, row, strict=True):
            cell.text = str(value)
    for note in notes:
        document.add_paragraph(note)
    _io.write_with(path, lambda tmp: document.save(str(tmp)), make_parents=False)


# -- the one export function -------------------------------------------------------------------------------


def _targets(path_or_dir: str | Path, name: str, formats: Sequence[str]) -> dict[str, Path]:
    """Where each format goes: ``DIR/<name>.<ext>`` for a folder, else ``<path without extension>.<ext>``."""
    path = Path(path_or_dir)
    if path.is_dir():
        return {f: file_in(path, name, f".{f}") for f in formats}
    stem = path.with_suffix("") if path.suffix.lstrip(".").lower() in ALL_FORMATS else path
    return {f: stem.with_name(f"{stem.name}.{f}") for f in formats}


def export_table(
    table: pd.DataFrame,
    path_or_dir: str | Path,
    formats: str | Iterable[str] = ALL_FORMATS,
    caption: str = "",
    labels: Labels | None = None,
    notes: str | Sequence[str] = (),
    *,
    name: str = "table",
    level: float = 0.95,
    style: IntervalStyle = "to",
    shown: pd.DataFrame | None = None,
    explain: bool = True,
) -> dict[str, Path]:
    """Write one tidy table in each of ``formats``; returns the path of each file by format.

    Parameters
    ----------
    table : DataFrame
        The table at full precision (one row per model, day, outcome, ...). Not modified.
    path_or_dir : path
        An existing folder (files ``<name>.csv``, ``<name>.md``, ... inside it) or a file path whose
        extension, if it is one of the formats, is replaced by each format's (``out/effects`` or
        ``out/effects.csv`` → ``out/effects.csv``, ``out/effects.md``, ...). Its folder must exist.
    formats : str or iterable of {"csv", "md", "html", "tex", "docx"}
        ``"csv,md"`` or a list; all five by default.
    caption : str
        Title shown above the table (not in the CSV).
    labels : mapping, optional
        Display names for columns, outcomes and exposures, e.g. ``{"deaths_all": "All-cause deaths"}``
        (:func:`~airhealth.report.labels.display_name`); the CSV keeps the original names.
    notes : str or sequence of str
        Paragraphs under the table: explain every code and abbreviation it uses.
    name : str
        File-name stem when ``path_or_dir`` is a folder (made safe by
        :func:`~airhealth.report.safe_names.safe_stem`).
    level, style
        Confidence level named in headings and the interval style of effects tables
        (:data:`~airhealth.report.numbers.IntervalStyle`).
    shown : DataFrame, optional
        The display view to write instead of ``display_table(table, labels)`` (same rows).
    explain : bool
        Add a note for each abbreviation and lag code the table uses (RR, CI, IQR, QAIC, p, '0-1', 'dl0-5',
        ...; :func:`~airhealth.report.tables.abbreviation_notes`) after ``notes``.

    Returns
    -------
    dict
        Format → path written.

    Raises
    ------
    DataError
        A table without columns; a folder that does not exist. An unknown format raises
        :class:`~airhealth.errors.SpecificationError` naming the valid ones.

    Notes
    -----
    A table with columns but no rows is written with its headings and the note "This table has no rows".
    Health counts are not suppressed here: give a table already passed through
    :func:`~airhealth.report.suppression.suppress_table` (the report writer does).

    Examples
    --------
    >>> import tempfile, pandas as pd
    >>> t = pd.DataFrame({"outcome": ["deaths_all"], "total": [179300]})
    >>> sorted(export_table(t, tempfile.mkdtemp(), formats="csv,md", name="counts"))
    ['csv', 'md']
    """
    chosen = parse_formats(formats)
    if len(table.columns) == 0:
        raise DataError(f"the table {caption or name!r} has no columns; there is nothing to export.")
    notes = [notes] if isinstance(notes, str) else list(notes)
    if table.empty:
        notes = [NO_ROWS, *notes]
    paths = _targets(path_or_dir, name, chosen)
    if chosen == ("csv",):
        return {"csv": _io.write_text(paths["csv"], table.to_csv(index=False), make_parents=False)}
    view = display_table(table, labels, level=level, style=style) if shown is None else shown
    view = view.astype(str) if len(view) else view
    repeated = list(dict.fromkeys(view.columns[view.columns.duplicated()]))
    if repeated:
        raise SpecificationError(
            f"the table {caption or name!r} would show two columns headed {repeated[0]!r}; give the columns "
            "different labels."
        )
    if explain:
        lags = table["lag"].dropna().unique() if "lag" in table else ()
        notes = table_notes(" ".join(notes), view.columns, lags)
    writers = {
        "csv": lambda p: _io.write_text(p, table.to_csv(index=False), make_parents=False),
        "md": lambda p: _io.write_text(p, _markdown(view, caption, notes), make_parents=False),
        "html": lambda p: _io.write_text(p, _html(view, caption, notes), make_parents=False),
        "tex": lambda p: _io.write_text(p, _latex(view, caption, notes), make_parents=False),
        "docx": lambda p: _docx(view, caption, notes, p),
    }
    for fmt, path in paths.items():
        writers[fmt](path)
    return paths
