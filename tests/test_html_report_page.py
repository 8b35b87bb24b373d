"""The HTML report page: contents, embedded figures equal to the files written, PNG at 300 dpi, the QAIC caveat
wherever QAIC appears, print rules, and a methods paragraph that names lags, interval type and versions."""

from __future__ import annotations

import base64
import re
import struct
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.report.city_report import report_content
from airhealth.report.document import Figure, Section, Table, Text
from airhealth.report.html import FIGURE_DPI, QAIC_CAVEAT, write_html_report
from airhealth.report.plots import new_axes


def _figure(size: tuple[float, float] = (4.0, 2.0)):
    ax = new_axes(size=size)
    ax.plot([0, 1, 2], [1.0, 1.02, 0.99])
    return ax.figure


def _png_size(path: Path) -> tuple[int, int]:
    return struct.unpack(">II", path.read_bytes()[16:24])


@pytest.fixture(scope="module")
def page(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, str]:
    out = tmp_path_factory.mktemp("page") / "r"
    sections = [
        Section(
            "First & foremost", [Text("No criterion here."), Table("plain", pd.DataFrame({"rr": [1.01]}), "plain")]
        ),
        Section("Model comparison", [Table("fits", pd.DataFrame({"lag": ["0"], "qaic": [123.4]}), "fits")]),
        Section("Notes", [Text("The lower QAIC was lag 1."), Figure("A curve", _figure(), "curve")]),
    ]
    path = write_html_report(sections, out, title="Page test")
    return out, path.read_text(encoding="utf-8")


def test_the_contents_link_every_section_in_the_order_given(page) -> None:
    _, html = page
    links = re.findall(r'<li><a href="#(section-\d+)">([^<]+)</a></li>', html)
    assert links == [("section-1", "First &amp; foremost"), ("section-2", "Model comparison"), ("section-3", "Notes")]
    for anchor, _ in links:
        assert f'<section id="{anchor}">' in html
    assert html.count("<strong>Caution.</strong>") == 2  # top and bottom


def test_the_qaic_caveat_follows_every_qaic_table_and_text_and_nothing_else(page) -> None:
    _, html = page
    caveat = QAIC_CAVEAT.replace("'", "&#x27;")
    assert html.count(caveat) == 2
    fits = html.index("fits.csv")
    assert html.index(caveat) > fits and html.index(caveat) < html.index('id="section-3"')
    assert caveat in html[html.index("The lower QAIC") :]
    first_section = html[html.index('id="section-1"') : html.index('id="section-2"')]
    assert caveat not in first_section


def test_figures_are_embedded_as_the_svg_written_and_the_png_is_300_dpi(page) -> None:
    out, html = page
    (embedded,) = re.findall(r"data:image/svg\+xml;base64,([A-Za-z0-9+/=]+)", html)
    assert base64.b64decode(embedded) == (out / "figures" / "curve.svg").read_bytes()
    assert _png_size(out / "figures" / "curve.png") == (4 * FIGURE_DPI, 2 * FIGURE_DPI) == (1200, 600)
    assert "href='figures/curve.png'" in html and "href='figures/curve.svg'" in html


def test_the_page_has_print_rules(page) -> None:
    _, html = page
    rules = html[html.index("@media print") :]
    assert "break-inside:avoid" in rules and "@page{size:A4" in rules and ".files{display:none}" in rules


def test_the_methods_paragraph_names_model_lags_interval_and_versions(tmp_path: Path) -> None:
    import numpy
    import scipy

    data = airhealth.load_sample()
    data = data[data["date"] < "2013-01-01"]
    content = report_content(data, ["deaths_all"], ["pm25"], ["0", "dl0-2"], temperature="temperature", interval="hac")
    texts = [b.text for b in content.sections[0].blocks if isinstance(b, Text)]
    methods = texts[1]
    assert "natural spline of time with 7 df per year" in methods
    assert "natural splines of same-day temperature (6 df)" in methods
    assert "Lag structures: 0, dl0-2" in methods and "distributed lag over days a to b" in methods
    assert "Newey–West (HAC)" in methods
    assert f"airhealth {airhealth.__version__}" in methods
    assert f"NumPy {numpy.__version__}" in methods and f"SciPy {scipy.__version__}" in methods


def test_an_empty_report_still_writes_a_valid_page(tmp_path: Path) -> None:
    html = write_html_report([], tmp_path / "r").read_text(encoding="utf-8")
    assert "<nav" not in html and html.count("<strong>Caution.</strong>") == 2
    assert np.all([tag in html for tag in ("<main>", "</main>", "<footer>")])


def test_an_empty_table_is_written_with_its_header(tmp_path: Path) -> None:
    empty = pd.DataFrame({"outcome": pd.Series([], dtype=str), "rr": pd.Series([], dtype=float)})
    html = write_html_report([Section("s", [Table("Nothing yet", empty, "empty")])], tmp_path / "r").read_text(
        encoding="utf-8"
    )
    assert "<h3>Nothing yet</h3>" in html and "<th>Outcome</th>" in html  # headings read as words
    assert pd.read_csv(tmp_path / "r" / "tables" / "empty.csv").columns.tolist() == ["outcome", "rr"]
