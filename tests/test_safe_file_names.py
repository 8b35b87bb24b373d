"""File names made from user text stay inside the report folder, work on every system and never collide."""

from __future__ import annotations

import hashlib
import re
from pathlib import Path

import matplotlib
import pandas as pd
import pytest

from airhealth.errors import DataError
from airhealth.report.document import Figure, Section, Table
from airhealth.report.html import write_html_report
from airhealth.report.plots import new_axes
from airhealth.report.safe_names import MAX_STEM, file_in, safe_stem

matplotlib.use("Agg")

# Characters and names Windows refuses in a file name: Microsoft, "Naming Files, Paths, and Namespaces"
# (learn.microsoft.com/windows/win32/fileio/naming-a-file). Linux refuses "/" and NUL (POSIX, from memory).
WINDOWS_FORBIDDEN = set('<>:"/\\|?*') | {chr(c) for c in range(32)}
RESERVED = ["CON", "prn", "Aux", "nul", "COM1", "com9", "LPT1", "lpt9"]

NASTY = [
    "x/../../../escaped",
    "..",
    ".",
    "../..",
    "/etc/passwd",
    "C:\\Windows\\system32",
    "..\\..\\escaped",
    "a\x00b",
    "tab\there\nnewline\x1b[31m",
    ".hidden",
    "trailing. ",
    "Ozone µg/m³",
    "日本語の列",
    "",
    " ",
    "<script>alert(1)</script>",
    "\"'&",
    *RESERVED,
    "x" * 300,
    "é" * 300,
]


def _expected_hash(text: str) -> str:
    """SHA-256 per FIPS 180-4, computed here with hashlib independently of the module's own call."""
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:8]


@pytest.mark.parametrize("text", NASTY)
def test_every_stem_is_a_plain_portable_name(text: str) -> None:
    stem = safe_stem(text)
    assert re.fullmatch(r"[a-z0-9][a-z0-9_-]*", stem), stem
    assert not set(stem) & WINDOWS_FORBIDDEN
    assert ".." not in stem and not stem.startswith(".")
    assert len(stem) <= MAX_STEM
    assert stem not in {r.lower() for r in RESERVED}, "a reserved device name survived (as 'con.png')"
    assert stem.endswith("-" + _expected_hash(text)), "changed text must carry the hash of the original"


def test_safe_names_are_kept_as_they_are() -> None:
    for text in ("effects", "series_pm25", "lag_response_dl0-5", "a1", "x" * MAX_STEM):
        assert safe_stem(text) == text


def test_changed_names_keep_a_readable_part() -> None:
    assert safe_stem("x/../../../escaped").startswith("x_escaped-")
    assert safe_stem("Ozone µg/m³").startswith("ozone_ug_m3-")
    assert safe_stem("Temperatur Göteborg").startswith("temperatur_goteborg-")
    assert safe_stem("CON").startswith("con-")
    assert safe_stem("日本語の列").startswith("x-")  # nothing readable in ASCII: only the hash


def test_different_names_never_share_a_stem_even_ignoring_case() -> None:
    names = ["PM2.5", "pm2_5", "PM2_5", "pm2.5", "pm2-5", "pm2 5", "Pm2.5", "deaths", "Deaths", "DEATHS", "x/y", "x\\y"]
    stems = [safe_stem(n).lower() for n in names]
    assert len(set(stems)) == len(names), dict(zip(names, stems, strict=True))


def test_long_names_are_cut_and_still_distinct() -> None:
    a, b = "outcome_" + "a" * 200 + "_one", "outcome_" + "a" * 200 + "_two"
    assert len(safe_stem(a)) <= MAX_STEM and len(safe_stem(b)) <= MAX_STEM
    assert safe_stem(a) != safe_stem(b)
    assert safe_stem(a) == safe_stem(a), "the stem must be stable from call to call"


def test_file_in_keeps_the_file_directly_inside_the_folder(tmp_path: Path) -> None:
    for text in NASTY:
        path = file_in(tmp_path, text, ".png")
        assert path.parent == tmp_path and path.resolve().parent == tmp_path.resolve()


def test_file_in_refuses_a_suffix_that_would_climb_out(tmp_path: Path) -> None:
    with pytest.raises(DataError, match="not inside the output folder"):
        file_in(tmp_path, "name", "/../../x.png")


def _figure() -> object:
    ax = new_axes()
    ax.plot([0, 1], [0, 1])
    return ax.figure


def test_a_traversing_column_name_cannot_write_outside_the_report(tmp_path: Path) -> None:
    """The measured bug: an outcome called x/../../../escaped wrote a PNG outside the output folder."""
    out = tmp_path / "a" / "b" / "report"
    names = ["x/../../../escaped", "..\\..\\escaped", "/tmp/escaped", "a\x00b", "CON", "日本"]
    blocks = [Figure(f"figure {n}", _figure(), f"effects_forest_{n}") for n in names]
    blocks += [Table(f"table {n}", pd.DataFrame({"v": [1]}), n) for n in names]
    write_html_report([Section("s", blocks)], out)
    written = [p for p in tmp_path.rglob("*") if p.is_file()]
    assert written and all(out in p.parents for p in written), [str(p) for p in written]
    assert len(list((out / "figures").glob("*.png"))) == len(names)
    assert len(list((out / "tables").glob("*.csv"))) == len(names)
    page = (out / "index.html").read_text(encoding="utf-8")
    for p in (out / "figures").iterdir():  # each PNG and SVG file is linked from the page
        assert f"href='figures/{p.name}'" in page


def test_repeated_block_names_get_distinct_files(tmp_path: Path) -> None:
    blocks = [Table(f"t{i}", pd.DataFrame({"v": [i]}), "same") for i in range(3)]
    write_html_report([Section("s", blocks)], tmp_path / "r")
    files = sorted(p.name for p in (tmp_path / "r" / "tables").iterdir())
    assert files == ["same-2.csv", "same-3.csv", "same.csv"]
    assert pd.read_csv(tmp_path / "r" / "tables" / "same-3.csv")["v"].tolist() == [2]


def test_the_measured_outcome_name_stays_inside_the_city_report(tmp_path: Path) -> None:
    """Before: write_city_report on an outcome called x/../../../escaped wrote <out>/../escaped.png."""
    import airhealth

    data = airhealth.load_sample()
    data = data[data["date"] < "2013-01-01"].rename(columns={"deaths_all": "x/../../../escaped"})
    out = tmp_path / "a" / "b" / "out"
    airhealth.write_report(
        data, outcomes=["x/../../../escaped"], exposures=["pm25"], lags=["0"], out=out, temperature="temperature"
    )
    written = [p for p in tmp_path.rglob("*") if p.is_file()]
    assert all(out in p.parents for p in written), [str(p) for p in written if out not in p.parents]
    forest = [p.name for p in (out / "figures").glob("*.png") if p.name.startswith("effects_forest_")]
    assert forest == [f"{safe_stem('effects_forest_x/../../../escaped')}.png"]
    assert forest[0].startswith("effects_forest_x_escaped-")
