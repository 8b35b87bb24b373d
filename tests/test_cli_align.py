"""``airhealth align``: the bundled three tables become one daily file that ``fit`` reads.

Reference: :func:`airhealth.load_sample`, which aligns the same three tables in Python with
:func:`airhealth.align_daily`; the command must give the same frame and the same fit.
"""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

import airhealth
from airhealth.cli.main import main
from airhealth.sample import sample_path

TABLES = [str(sample_path(name)) for name in ("counts", "pollution", "weather")]


@pytest.fixture(scope="module")
def aligned(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("align") / "daily.csv"
    assert main(["align", *TABLES, "--out", str(out)]) == 0
    return out


def test_align_equals_align_daily_of_the_sample(aligned: Path) -> None:
    written = pd.read_csv(aligned, parse_dates=["date"])
    expected = airhealth.load_sample()
    pd.testing.assert_frame_equal(written, expected, check_dtype=False)
    assert not [p for p in aligned.parent.iterdir() if p.name != aligned.name]  # no temporary file left


def test_fit_reads_the_aligned_file(aligned: Path, capsys: pytest.CaptureFixture) -> None:
    capsys.readouterr()
    code = main(["fit", str(aligned), "--outcome", "deaths_all", "--exposure", "pm25", "--temperature",
                 "temperature", "--json"])  # fmt: skip
    assert code == 0
    record = json.loads(capsys.readouterr().out)
    direct = airhealth.fit(airhealth.load_sample(), outcome="deaths_all", exposure="pm25", temperature="temperature")
    # the CSV round trip of the exposure (shortest repr of each float) gives back the same doubles
    assert record["coef"] == pytest.approx(direct.exposure_coef, rel=1e-12)
    assert record["n_days"] == direct.n_days


def test_align_prints_what_it_wrote(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    out = tmp_path / "daily.csv"
    assert main(["align", *TABLES, "--out", str(out), "--start", "2015-01-01", "--end", "2015-12-31"]) == 0
    said = capsys.readouterr().out
    assert f"wrote {out}: 365 days from 2015-01-01 to 2015-12-31, 9 columns from 3 tables" in said
    assert len(pd.read_csv(out)) == 365


def test_align_guards_name_the_file(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    twice = tmp_path / "again.csv"
    pd.read_csv(TABLES[1]).to_csv(twice, index=False)
    code = main(["align", TABLES[0], TABLES[1], str(twice), "--out", str(tmp_path / "d.csv")])
    assert code == 2
    assert "column 'pm25' appears in both norhaven_pollution.csv and again.csv; rename one of them" in (
        capsys.readouterr().err
    )
    dup = tmp_path / "dup.csv"
    counts = pd.read_csv(TABLES[0])
    pd.concat([counts, counts.iloc[[3]]]).to_csv(dup, index=False)
    assert main(["align", str(dup), TABLES[2], "--out", str(tmp_path / "d.csv")]) == 2
    assert "column 'date' in dup.csv has duplicated dates: 2010-01-04" in capsys.readouterr().err
    assert not (tmp_path / "d.csv").exists()


def test_align_output_folder_and_inputs(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    assert main(["align", *TABLES, "--out", str(tmp_path / "no" / "d.csv")]) == 2
    assert "folder" in capsys.readouterr().err
    copy = tmp_path / "counts.csv"
    pd.read_csv(TABLES[0]).to_csv(copy, index=False)
    assert main(["align", str(copy), TABLES[2], "--out", str(copy)]) == 2
    assert "is one of the input tables" in capsys.readouterr().err


def test_align_reads_day_first_dates_with_a_format(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    paths = []
    for name in TABLES[:2]:
        table = pd.read_csv(name)
        table["date"] = pd.to_datetime(table["date"]).dt.strftime("%d.%m.%Y")
        paths.append(tmp_path / Path(name).name)
        table.to_csv(paths[-1], index=False)
    out = tmp_path / "d.csv"
    assert main(["align", *map(str, paths), "--out", str(out)]) == 2
    assert "--date-format '%d.%m.%Y'" in capsys.readouterr().err
    assert main(["align", *map(str, paths), "--out", str(out), "--date-format", "%d.%m.%Y"]) == 0
    written = pd.read_csv(out)
    assert written["date"].iloc[[0, -1]].tolist() == ["2010-01-01", "2023-12-31"]
