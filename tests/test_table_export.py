"""One table, five formats (airhealth.report.export.export_table): same numbers, safe text, readable files.

Each format is read back with an independent reader — pandas for CSV, the standard library's HTML parser,
python-docx for Word, plain splitting for Markdown and a regular expression for LaTeX — and every display
format must hold exactly the text that the formatting rules give for the numbers read back from the CSV.
"""

from __future__ import annotations

import html
import re
import shutil
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import docx
import pandas as pd
import pytest

from airhealth.errors import DataError, SpecificationError
from airhealth.report.export import export_table
from airhealth.report.numbers import format_count, format_p, format_rr
from airhealth.report.tables import display_table

LONG = "A very long outcome name that goes on and on " * 4
AWKWARD = ["a<b & c", "50% _x_ $5 #1 {a} ~ ^ \\ | pipe", LONG.strip(), "Ciudad Jardín — Żółć"]


@pytest.fixture
def effects() -> pd.DataFrame:
    return pd.DataFrame({
        "outcome": ["deaths_all", "admissions_respiratory", "deaths_all"],
        "exposure": ["pm25", "pm25", "o3"],
        "lag": ["0", "0-1", "dl0-5"],
        "per": [10.0, 10.0, 10.0],
        "unit": ["µg/m³", "µg/m³", "ppb"],
        "rr": [1.0083412345678, 1.0201, 0.99712],
        "rr_low": [0.9991234, 1.0011, 0.9871],
        "rr_high": [1.0172135, 1.0394, 1.00729],
        "p_value": [0.0712345, 0.00012, 0.5812],
        "n_days": [5024, 4950, 4647],
    })  # fmt: skip


# -- independent readers -----------------------------------------------------------------------------------


def read_markdown(path: Path) -> list[list[str]]:
    rows = [line for line in path.read_text(encoding="utf-8").splitlines() if line.startswith("|")]
    cells = [[c.strip() for c in re.split(r"(?<!\\)\|", row)[1:-1]] for row in rows]
    cells = [[re.sub(r"\\(.)", r"\1", c) for c in row] for row in cells]  # CommonMark backslash escapes
    cells = [[html.unescape(c) for c in row] for row in cells]  # CommonMark entity references (&amp;)
    return [cells[0], *cells[2:]]  # header, then the rows after the alignment line


class _Cells(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.rows: list[list[str]] = []
        self.cell: list[str] | None = None

    def handle_starttag(self, tag, attrs):
        if tag == "tr":
            self.rows.append([])
        elif tag in ("td", "th"):
            self.cell = []

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self.cell is not None:
            self.rows[-1].append("".join(self.cell).strip())
            self.cell = None

    def handle_data(self, data):
        if self.cell is not None:
            self.cell.append(data)


def read_html(path: Path) -> list[list[str]]:
    parser = _Cells()
    parser.feed(path.read_text(encoding="utf-8"))
    return parser.rows


_LATEX_UNESCAPE = [
    (re.compile(r"\\textbackslash(\{\}| )?"), "\\"),
    (re.compile(r"\\textasciitilde(\{\}| )?"), "~"),
    (re.compile(r"\\textasciicircum(\{\}| )?"), "^"),
    (re.compile(r"\\textless(\{\}| )?"), "<"),
    (re.compile(r"\\textgreater(\{\}| )?"), ">"),
    (re.compile(r"\\space ?"), " "),  # pandas writes a space after an escape word this way
    (re.compile(r"\\([%$#_&{}])"), r"\1"),
]


def latex_cells(path: Path) -> list[list[str]]:
    """Raw (escaped) cells of the tabular: the heading row and the body rows."""
    text = path.read_text(encoding="utf-8")
    head = text.split("\\toprule")[1].split("\\midrule")[0]
    body = text.split("\\midrule")[1].split("\\bottomrule")[0]
    rows = [r for r in re.split(r"\\\\\s*\n", head + body) if r.strip()]
    return [[c.strip() for c in re.split(r"(?<!\\)&", row)] for row in rows]


def unescape_latex(cell: str) -> str:
    for pattern, plain in _LATEX_UNESCAPE:
        cell = pattern.sub(lambda m, p=plain: p if p != r"\1" else m.group(1), cell)
    return cell


def read_latex(path: Path) -> list[list[str]]:
    return [[unescape_latex(c) for c in row] for row in latex_cells(path)]


def read_docx(path: Path) -> list[list[str]]:
    table = docx.Document(str(path)).tables[0]
    return [[cell.text for cell in row.cells] for row in table.rows]


READERS = {"md": read_markdown, "html": read_html, "tex": read_latex, "docx": read_docx}


# -- the same numbers in every format ----------------------------------------------------------------------


def test_every_format_holds_the_same_numbers(effects, tmp_path):
    paths = export_table(effects, tmp_path, caption="Relative risks", name="effects")
    assert sorted(p.name for p in tmp_path.iterdir()) == [f"effects.{f}" for f in ("csv", "docx", "html", "md", "tex")]
    back = pd.read_csv(paths["csv"])
    pd.testing.assert_frame_equal(back, effects)  # full precision: Python's float repr round-trips exactly
    view = display_table(back)
    expected = [list(view.columns), *view.astype(str).to_numpy().tolist()]
    for fmt, reader in READERS.items():
        assert reader(paths[fmt]) == expected, fmt
    # the displayed numbers are the rules applied to the CSV's numbers
    first = read_markdown(paths["md"])[1]
    assert first[4] == format_rr(back.rr[0], back.rr_low[0], back.rr_high[0], 3) == "1.008 (0.999 to 1.017)"
    assert format_p(back.p_value[1]) == "<0.001" and read_docx(paths["docx"])[2][6] == "<0.001"
    assert read_html(paths["html"])[1][-1] == format_count(5024) == "5,024"


def test_the_interval_style_and_labels_reach_every_display_format_but_not_the_csv(effects, tmp_path):
    labels = {"deaths_all": "All-cause deaths", "pm25": "PM2.5", "lag": "Lag"}
    paths = export_table(effects, tmp_path / "effects.csv", labels=labels, style="brackets")
    assert pd.read_csv(paths["csv"])["outcome"].tolist() == ["deaths_all", "admissions_respiratory", "deaths_all"]
    for fmt, reader in READERS.items():
        rows = reader(paths[fmt])
        assert rows[0][:3] == ["Outcome", "Exposure", "Lag"], fmt
        assert rows[1][:2] == ["All-cause deaths", "PM2.5"], fmt
        assert rows[1][4] == "1.008 [0.999, 1.017]", fmt


def test_abbreviations_and_lag_codes_are_explained_under_the_table(effects, tmp_path):
    paths = export_table(effects, tmp_path, formats="md,docx", notes="Invented data.")
    text = paths["md"].read_text(encoding="utf-8")
    for needed in ("Invented data.", "RR: relative risk", "CI: confidence interval", "p: two-sided",
                   "'0-1' the mean over lags 0 to 1", "'dl0-5': a distributed lag"):  # fmt: skip
        assert needed in text
    paragraphs = [p.text for p in docx.Document(str(paths["docx"])).paragraphs]
    assert "Invented data." in paragraphs and any(p.startswith("RR: relative risk") for p in paragraphs)


# -- user text is escaped in every format ------------------------------------------------------------------


@pytest.fixture
def awkward() -> pd.DataFrame:
    return pd.DataFrame({"outcome": AWKWARD, "total": [179300, 12, 5, 1_000_000]})


def test_special_characters_survive_every_format(awkward, tmp_path):
    paths = export_table(awkward, tmp_path, caption="Counts <50% & $ _", name="awkward")
    for fmt, reader in READERS.items():
        assert [row[0] for row in reader(paths[fmt])[1:]] == AWKWARD, fmt
    assert pd.read_csv(paths["csv"])["outcome"].tolist() == AWKWARD


def test_html_escapes_angle_brackets_and_ampersands(awkward, tmp_path):
    page = export_table(awkward, tmp_path, formats="html", caption="Counts <50% & more")["html"].read_text("utf-8")
    assert "a&lt;b &amp; c" in page and "a<b" not in page
    assert "<caption>Counts &lt;50% &amp; more</caption>" in page
    assert "Ciudad Jardín — Żółć" in page and "charset='utf-8'" in page


def test_latex_escapes_every_special_character(awkward, tmp_path):
    path = export_table(awkward, tmp_path, formats="tex", caption="Counts 50% & $ _ #")["tex"]
    text = path.read_text(encoding="utf-8")
    assert r"\caption{Counts 50\% \& \$ \_ \#}" in text
    special = latex_cells(path)[2][0]  # the row holding % _ $ # { } ~ ^ \ |
    stripped = special
    for pattern, _ in _LATEX_UNESCAPE:
        stripped = pattern.sub("", stripped)
    assert not re.search(r"[%$#_&{}~^\\]", stripped), special  # nothing left unescaped
    assert "Ciudad Jardín — Żółć" in text and "usepackage[utf8]{inputenc}" in text
    assert "p{5cm}" in text  # the column with a very long label wraps


def test_markdown_escapes_the_pipe_and_keeps_one_line_per_row(tmp_path):
    table = pd.DataFrame({"name": ["left | right", "two\nlines"], "n": [1, 2]})
    text = export_table(table, tmp_path, formats="md")["md"].read_text(encoding="utf-8")
    assert "left \\| right" in text and "| two lines | 2 |" in text
    assert read_markdown(tmp_path / "table.md")[1:] == [["left | right", "1"], ["two lines", "2"]]


def test_markdown_escapes_markup_so_text_cannot_become_html_or_emphasis(tmp_path):
    table = pd.DataFrame({"name": ["<b>bold</b>", "*star* _under_ `code` [link](x)"]})
    text = export_table(table, tmp_path, formats="md", caption="A *caption*")["md"].read_text(encoding="utf-8")
    assert "\\<b>bold\\</b>" in text and "\\*star\\* \\_under\\_ \\`code\\` \\[link\\](x)" in text
    assert "**A \\*caption\\***" in text


def test_the_word_file_opens_and_holds_the_table_with_its_caption(awkward, tmp_path):
    document = docx.Document(str(export_table(awkward, tmp_path, formats="docx", caption="Counts")["docx"]))
    assert document.paragraphs[0].text == "Counts"
    assert len(document.tables) == 1 and read_docx(tmp_path / "table.docx")[1] == ["a<b & c", "179,300"]


@pytest.mark.skipif(shutil.which("pdflatex") is None, reason="pdflatex (a TeX engine) is not installed here")
def test_the_latex_table_compiles(awkward, effects, tmp_path):
    export_table(awkward, tmp_path, formats="tex", name="awkward", caption="Awkward 50% & _")
    export_table(effects, tmp_path, formats="tex", name="effects", caption="Effects")
    (tmp_path / "doc.tex").write_text(
        "\\documentclass{article}\\usepackage[utf8]{inputenc}\\usepackage[T1]{fontenc}\\usepackage{booktabs}"
        "\\usepackage{textcomp}\\begin{document}\\input{awkward.tex}\\input{effects.tex}\\end{document}\n",
        encoding="utf-8",
    )
    run = subprocess.run(
        ["pdflatex", "-interaction=nonstopmode", "-halt-on-error", "doc.tex"],
        cwd=tmp_path, capture_output=True, text=True, timeout=120,
    )  # fmt: skip
    assert run.returncode == 0, run.stdout[-2000:]
    assert (tmp_path / "doc.pdf").stat().st_size > 0


# -- empty and bad input -----------------------------------------------------------------------------------


def test_a_table_without_rows_is_written_with_its_headings_and_a_no_rows_note(effects, tmp_path):
    paths = export_table(effects.iloc[:0], tmp_path, caption="Nothing")
    assert pd.read_csv(paths["csv"]).columns.tolist() == effects.columns.tolist()
    for fmt, reader in READERS.items():
        rows = reader(paths[fmt])
        assert len(rows) == 1 and "RR (95% CI)" in rows[0], fmt
    for fmt in ("md", "html", "tex"):
        assert "This table has no rows" in paths[fmt].read_text(encoding="utf-8"), fmt
    assert any("no rows" in p.text for p in docx.Document(str(paths["docx"])).paragraphs)


def test_a_table_without_columns_is_refused_by_name(tmp_path):
    with pytest.raises(DataError, match="'Dropped days' has no columns"):
        export_table(pd.DataFrame(), tmp_path, caption="Dropped days")


def test_an_unknown_format_is_refused_naming_the_valid_ones(effects, tmp_path):
    with pytest.raises(SpecificationError, match=r"table format='xlsx'.*'csv', 'md', 'html', 'tex', 'docx'"):
        export_table(effects, tmp_path, formats="csv,xlsx")
    assert list(tmp_path.iterdir()) == []  # checked before anything is written


def test_a_missing_folder_is_named_and_nothing_is_written(effects, tmp_path):
    with pytest.raises(DataError, match=r"no_such_dir.*does not exist"):
        export_table(effects, tmp_path / "no_such_dir" / "effects", formats="csv")


def test_export_leaves_the_callers_table_and_no_temporary_files(effects, tmp_path):
    before = effects.copy(deep=True)
    export_table(effects, tmp_path, labels={"deaths_all": "All-cause deaths"})
    pd.testing.assert_frame_equal(effects, before)
    assert not [p.name for p in tmp_path.iterdir() if p.name.startswith(".")]


# -- how other tables are shown ----------------------------------------------------------------------------


def test_per_lag_effects_show_one_interval_column_and_explain_the_coefficient(tmp_path):
    table = pd.DataFrame({
        "lag_structure": ["dl0-5", "dl0-5"], "lag": [0, 1], "coef": [0.0002143, -0.0007548],
        "se": [0.0005466, 0.0006409], "rr": [1.00215, 0.99248], "rr_low": [0.99146, 0.98010],
        "rr_high": [1.01295, 1.00501],
    })  # fmt: skip
    paths = export_table(table, tmp_path, formats="md")
    rows = read_markdown(paths["md"])
    assert rows[0] == ["Lag structure", "Lag (days)", "Coefficient", "SE", "RR (95% CI)"]
    assert rows[1] == ["dl0-5", "0", "0.0002143", "0.0005466", "1.002 (0.991 to 1.013)"]
    text = paths["md"].read_text(encoding="utf-8")
    assert "Coefficient: log relative risk per unit" in text and "SE: standard error" in text


def test_dates_share_one_form_per_column_and_fractional_days_are_not_rounded(tmp_path):
    table = pd.DataFrame({
        "first_missing": pd.to_datetime(["2022-01-01 00:00", "2022-04-22 12:00"]), "days": [73.0, 0.5],
    })  # fmt: skip
    rows = read_markdown(export_table(table, tmp_path, formats="md")["md"])
    assert rows[1:] == [["2022-01-01 00:00", "73"], ["2022-04-22 12:00", "0.5"]]


def test_labels_that_give_two_columns_one_heading_are_refused(effects, tmp_path):
    with pytest.raises(SpecificationError, match="two columns headed 'Name'; give the columns different labels"):
        export_table(effects, tmp_path, formats="md", labels={"outcome": "Name", "exposure": "Name"})


def test_markdown_writes_ampersands_as_entities_so_a_label_holding_one_shows_as_written(tmp_path):
    # CommonMark reads "&amp;" as an entity reference: unescaped, the label "R&amp;D" would show as "R&D"
    table = pd.DataFrame({"name": ["R&amp;D", "a & b"]})
    text = export_table(table, tmp_path, formats="md")["md"].read_text(encoding="utf-8")
    assert "| R&amp;amp;D |" in text and "| a &amp; b |" in text
    assert read_markdown(tmp_path / "table.md")[1:] == [["R&amp;D"], ["a & b"]]


def test_latex_writes_angle_brackets_as_commands_not_bare_characters(tmp_path):
    # bare < and > print as inverted ! and ? in LaTeX's default OT1 font encoding
    table = pd.DataFrame({"p <0.05": ["<0.001", "a > b"]})
    text = export_table(table, tmp_path, formats="tex", caption="p <0.05")["tex"].read_text(encoding="utf-8")
    body = text.split("\\begin{tabular}")[1]
    assert "<" not in body and ">" not in body
    assert r"\textless{}0.001" in body and r"a \textgreater{} b" in body and r"p \textless{}0.05" in body
    assert r"\caption{p \textless{}0.05}" in text
    assert read_latex(tmp_path / "table.tex") == [["p <0.05"], ["<0.001"], ["a > b"]]
