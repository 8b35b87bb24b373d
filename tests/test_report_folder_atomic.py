"""A report folder appears whole or not at all: a failed run leaves no half-written report behind."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from airhealth import _io
from airhealth.errors import DataError
from airhealth.report.document import Figure, Section, Table, Text
from airhealth.report.html import write_html_report
from airhealth.report.plots import new_axes


class _BrokenFigure:
    """A figure whose drawing fails half-way: some bytes of the PNG are already written."""

    def __init__(self, error: type[BaseException] = RuntimeError) -> None:
        self.error = error

    def savefig(self, path: Path, **_: object) -> None:
        Path(path).write_bytes(b"\x89PNG half")
        raise self.error("drawing failed half-way")


def _good_figure() -> object:
    ax = new_axes()
    ax.plot([0, 1], [0, 1])
    return ax.figure


def _sections(figure: object, label: str = "new") -> list[Section]:
    return [
        Section(
            "s",
            [
                Text(f"{label} text"),
                Table("t", pd.DataFrame({"v": [1, 2]}), f"table_{label}"),
                Figure("ok", _good_figure(), f"figure_{label}"),
                Figure("f", figure, "last"),
            ],
        )
    ]


def _entries(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


def test_a_failing_figure_leaves_no_report_and_no_temporary_folder(tmp_path: Path) -> None:
    with pytest.raises(RuntimeError, match="half-way"):
        write_html_report(_sections(_BrokenFigure()), tmp_path / "report")
    assert _entries(tmp_path) == [], "neither the report nor a temporary folder may remain"


def test_a_failing_run_keeps_the_previous_report_intact(tmp_path: Path) -> None:
    out = tmp_path / "report"
    write_html_report(_sections(_good_figure(), "old"), out)
    before = {p.relative_to(out): p.read_bytes() for p in out.rglob("*") if p.is_file()}
    with pytest.raises(RuntimeError, match="half-way"):
        write_html_report(_sections(_BrokenFigure()), out)
    after = {p.relative_to(out): p.read_bytes() for p in out.rglob("*") if p.is_file()}
    assert after == before
    assert _entries(tmp_path) == ["report"]


def test_an_interrupted_run_cleans_up_too(tmp_path: Path) -> None:
    with pytest.raises(KeyboardInterrupt):
        write_html_report(_sections(_BrokenFigure(KeyboardInterrupt)), tmp_path / "report")
    assert _entries(tmp_path) == []


def test_a_new_report_replaces_the_old_one_whole(tmp_path: Path) -> None:
    out = tmp_path / "report"
    write_html_report(_sections(_good_figure(), "old"), out)
    write_html_report(_sections(_good_figure(), "new"), out)
    assert _entries(out / "tables") == ["table_new.csv"], "files of the old report must not linger"
    assert _entries(out / "figures") == ["figure_new.png", "figure_new.svg", "last.png", "last.svg"]
    assert "new text" in (out / "index.html").read_text(encoding="utf-8")
    assert _entries(tmp_path) == ["report"]


def test_a_folder_holding_other_files_is_never_replaced(tmp_path: Path) -> None:
    out = tmp_path / "my documents"
    out.mkdir()
    (out / "thesis.docx").write_text("precious")
    with pytest.raises(DataError, match=r"'.*my documents' already exists and holds files .*thesis\.docx"):
        write_html_report(_sections(_good_figure()), out)
    assert _entries(out) == ["thesis.docx"] and _entries(tmp_path) == ["my documents"]


def test_a_report_folder_with_an_added_file_is_not_replaced(tmp_path: Path) -> None:
    out = tmp_path / "report"
    write_html_report(_sections(_good_figure(), "old"), out)
    (out / "my_notes.txt").write_text("mine")
    with pytest.raises(DataError, match=r"my_notes\.txt"):
        write_html_report(_sections(_good_figure()), out)
    assert (out / "my_notes.txt").read_text() == "mine"


def test_an_empty_existing_folder_is_used(tmp_path: Path) -> None:
    out = tmp_path / "report"
    out.mkdir()
    write_html_report(_sections(_good_figure()), out)
    assert (out / "index.html").is_file()


def test_a_file_in_place_of_the_folder_is_refused(tmp_path: Path) -> None:
    target = tmp_path / "report"
    target.write_text("not a folder")
    with pytest.raises(DataError, match="a file of that name exists; choose another path"):
        write_html_report(_sections(_good_figure()), target)
    assert target.read_text() == "not a folder"


def test_atomic_directory_creates_missing_parents_and_usual_permissions(tmp_path: Path) -> None:
    target = tmp_path / "a" / "b" / "out"
    with _io.atomic_directory(target) as tmp:
        assert tmp.parent == target.parent and tmp.name.startswith(".out.tmp-")
        (tmp / "f.txt").write_text("x")
        assert not target.exists(), "nothing is visible under the final name before the end"
    assert (target / "f.txt").read_text() == "x"
    assert target.stat().st_mode & 0o777 == 0o777 & ~_umask()  # as mkdir would make it, not mkdtemp's 0700


def _umask() -> int:
    import os

    mask = os.umask(0)
    os.umask(mask)
    return mask


def test_a_report_folder_with_a_stray_file_in_figures_is_not_replaced(tmp_path: Path) -> None:
    out = tmp_path / "report"
    write_html_report(_sections(_good_figure(), "old"), out)
    (out / "figures" / "draft.pptx").write_text("mine")
    (out / ".DS_Store").write_text("")  # left by a file browser: no reason to refuse
    with pytest.raises(DataError, match=r"holds files that airhealth did not write \(figures/draft\.pptx\)"):
        write_html_report(_sections(_good_figure()), out)
    assert (out / "figures" / "draft.pptx").read_text() == "mine"


def test_a_folder_with_someone_elses_index_page_is_not_replaced(tmp_path: Path) -> None:
    out = tmp_path / "site"
    out.mkdir()
    (out / "index.html").write_text("<html>my web site</html>")
    with pytest.raises(DataError, match=r"index\.html \(not an airhealth report\)"):
        write_html_report(_sections(_good_figure()), out)


def test_the_working_directory_is_never_replaced(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)
    with pytest.raises(DataError, match="holds the current working directory"):
        write_html_report(_sections(_good_figure()), ".")
    with pytest.raises(DataError, match="holds the current working directory"):
        write_html_report(_sections(_good_figure()), tmp_path.parent)
    assert _entries(tmp_path) == []
