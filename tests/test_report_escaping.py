"""Every piece of user text in a report page is HTML-escaped: no column name or title can add markup."""

from __future__ import annotations

from html.parser import HTMLParser
from pathlib import Path

import matplotlib
import pandas as pd
import pytest

import airhealth
from airhealth.report.document import Figure, Section, Table, Text
from airhealth.report.html import write_html_report
from airhealth.report.plots import new_axes

matplotlib.use("Agg")

SCRIPT = "<script>alert(1)</script>"
QUOTES = "\"'&"
HOSTILE = f"{SCRIPT} {QUOTES} <img src=x onerror=alert(2)>"

# The only elements the writer itself emits; anything else in the page came from user text.
OWN_TAGS = {
    "html", "head", "meta", "title", "style", "body", "h1", "h2", "h3", "p", "strong", "table", "thead",
    "tbody", "tr", "th", "td", "a", "figure", "img", "figcaption", "header", "nav", "ol", "li", "main", "section",
    "footer", "span",
}  # fmt: skip
OWN_ATTRIBUTES = {
    "lang", "charset", "name", "content", "href", "src", "alt", "class", "border", "style", "id", "aria-label",
}  # fmt: skip


class _Page(HTMLParser):
    """Collects the page's elements, attributes and text as a browser's parser would see them."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[str] = []
        self.attributes: list[tuple[str, str | None]] = []
        self.text: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        self.attributes.extend(attrs)

    def handle_data(self, data: str) -> None:
        self.text.append(data)


def _parse(page: str) -> _Page:
    parser = _Page()
    parser.feed(page)
    parser.close()
    return parser


def _assert_no_user_markup(page: str, *user_texts: str) -> _Page:
    parsed = _parse(page)
    assert set(parsed.tags) <= OWN_TAGS, set(parsed.tags) - OWN_TAGS
    assert {a for a, _ in parsed.attributes} <= OWN_ATTRIBUTES
    assert "<script" not in page.lower()  # ("onerror=" may appear, as text: the attribute check covers it)
    text = "".join(parsed.text)
    for user_text in user_texts:  # escaped, not dropped: the reader sees the text exactly as typed
        assert user_text in text
    return parsed


def test_hostile_text_in_every_block_field_is_shown_as_text(tmp_path: Path) -> None:
    ax = new_axes()
    ax.plot([0, 1], [1, 0])
    frame = pd.DataFrame({HOSTILE: [HOSTILE, 1], "count": [3, 12]})
    section = Section(
        HOSTILE,
        [
            Text(HOSTILE),
            Table(HOSTILE, frame, HOSTILE, note=HOSTILE, count_columns=("count",)),
            Table(HOSTILE, frame, HOSTILE, display=False),
            Figure(HOSTILE, ax.figure, HOSTILE, note=HOSTILE),
        ],
    )
    path = write_html_report([section], tmp_path / "r", title=HOSTILE, subtitle=HOSTILE, small_count_threshold=5)
    parsed = _assert_no_user_markup(path.read_text(encoding="utf-8"), HOSTILE)
    alts = [v for a, v in parsed.attributes if a == "alt"]
    assert alts == [HOSTILE], "the alt text is the title, exactly, after unescaping"
    for value in (v for a, v in parsed.attributes if a == "href"):  # files of the report, or its own sections
        assert value is not None and "'" not in value
        if not value.startswith("#section-"):
            assert value.split("/")[0] in ("tables", "figures") and (tmp_path / "r" / value).is_file()
    for value in (v for a, v in parsed.attributes if a == "src"):  # figures are embedded, nothing is fetched
        assert value is not None and value.startswith("data:image/svg+xml;base64,") and "'" not in value


def test_a_report_on_hostile_column_names_escapes_them(tmp_path: Path) -> None:
    """Outcome and exposure columns named with markup and quotes, through the whole one-city report."""
    data = airhealth.load_sample()
    data = data[data["date"] < "2013-01-01"].rename(columns={"deaths_all": SCRIPT, "pm25": QUOTES})
    path = airhealth.write_report(
        data,
        outcomes=[SCRIPT],
        exposures=[QUOTES],
        lags=["0"],
        out=tmp_path / "report",
        title=f"{SCRIPT} report",
        temperature="temperature",
    )
    page = path.read_text(encoding="utf-8")
    _assert_no_user_markup(page, SCRIPT, QUOTES)
    assert "&lt;script&gt;" in page
    table = pd.read_csv(tmp_path / "report" / "tables" / "effects_full.csv")
    assert table["outcome"].tolist() == [SCRIPT] and table["exposure"].tolist() == [QUOTES]


@pytest.mark.parametrize("cell", [SCRIPT, QUOTES, "a & b < c > d"])
def test_table_cells_and_headers_are_escaped(tmp_path: Path, cell: str) -> None:
    frame = pd.DataFrame({cell: [cell]})
    path = write_html_report([Section("s", [Table("t", frame, "t")])], tmp_path / "r")
    parsed = _assert_no_user_markup(path.read_text(encoding="utf-8"), cell)
    assert "".join(parsed.text).count(cell) >= 2  # header and cell
