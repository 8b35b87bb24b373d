"""Write a report (sections of text, tables and figures) as a self-contained HTML page.

Tables are also written as CSV and figures as PNG beside the page. Health counts in tables are suppressed
below the user's disclosure threshold. Every report carries the caution that results are associations.
Nothing is sent anywhere: everything is written to the local output directory, each file atomically.
"""

from __future__ import annotations

import datetime as _dt
import html
from collections.abc import Sequence
from pathlib import Path

import pandas as pd

from .. import _io
from .document import CAUTION, Figure, Section, Table, Text
from .tables import suppress_small_counts

__all__ = ["write_html_report"]

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


def _table_html(block: Table, threshold: int | None) -> tuple[str, pd.DataFrame]:
    frame = suppress_small_counts(block.frame, block.count_columns, threshold)
    link = f"<p class='note'><a href='tables/{block.name}.csv'>{block.name}.csv</a></p>"
    if not block.display:
        return (
            f"<p class='note'>{html.escape(block.title)}: <a href='tables/{block.name}.csv'>{block.name}.csv</a></p>",
            frame,
        )
    body = frame.to_html(index=False, border=0, na_rep="", float_format=lambda v: f"{v:.4g}", escape=True)
    note = f"<p class='note'>{html.escape(block.note)}</p>" if block.note else ""
    return f"<h3>{html.escape(block.title)}</h3>{body}{note}{link}", frame


def _figure_html(block: Figure, out: Path) -> str:
    path = out / "figures" / f"{block.name}.png"
    _io.write_with(path, lambda tmp: block.figure.savefig(tmp, dpi=110, format="png"))
    note = f"<p class='note'>{html.escape(block.note)}</p>" if block.note else ""
    return (
        f"<figure><img src='figures/{block.name}.png' alt='{html.escape(block.title)}'>"
        f"<figcaption>{html.escape(block.title)}</figcaption></figure>{note}"
    )


def write_html_report(
    sections: Sequence[Section],
    out_dir: str | Path,
    title: str = "airhealth report",
    small_count_threshold: int | None = None,
    subtitle: str = "",
) -> Path:
    """Write ``index.html`` with every section, plus ``tables/*.csv`` and ``figures/*.png``.

    Parameters
    ----------
    sections : sequence of Section
        Report content.
    out_dir : path
        Output directory (created if needed).
    title, subtitle : str
        Page heading.
    small_count_threshold : int or None
        Counts between 1 and this threshold − 1 in the tables' count columns are shown as ``<threshold``
        (in the page and the CSV files), per local disclosure rules. ``None`` disables suppression.

    Returns
    -------
    Path
        The path of ``index.html``.
    """
    out = Path(out_dir)
    (out / "tables").mkdir(parents=True, exist_ok=True)
    (out / "figures").mkdir(parents=True, exist_ok=True)
    caution = f"<p class='caution'><strong>Caution.</strong> {html.escape(CAUTION)}</p>"
    parts = [f"<h1>{html.escape(title)}</h1>"]
    if subtitle:
        parts.append(f"<p class='note'>{html.escape(subtitle)}</p>")
    parts.append(caution)
    if small_count_threshold is not None:
        parts.append(f"<p class='note'>Counts below {small_count_threshold} are suppressed.</p>")
    for section in sections:
        parts.append(f"<h2>{html.escape(section.title)}</h2>")
        for block in section.blocks:
            if isinstance(block, Text):
                parts.append(f"<p>{html.escape(block.text)}</p>")
            elif isinstance(block, Table):
                markup, shown = _table_html(block, small_count_threshold)
                _io.write_text(out / "tables" / f"{block.name}.csv", shown.to_csv(index=False))
                parts.append(markup)
            elif isinstance(block, Figure):
                parts.append(_figure_html(block, out))
    stamp = _dt.datetime.now().strftime("%Y-%m-%d %H:%M")
    parts.append(caution)
    parts.append(
        f"<p class='note'>Written by airhealth on {stamp}. Everything in this report was computed "
        "locally; no data were sent anywhere.</p>"
    )
    page = (
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
        f"<title>{html.escape(title)}</title><style>{_STYLE}</style></head><body>" + "\n".join(parts) + "</body></html>"
    )
    return _io.write_text(out / "index.html", page)
