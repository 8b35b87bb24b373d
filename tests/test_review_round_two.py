"""Defects a second review found in the report, align and file reading, each pinned by its reviewed case."""

from __future__ import annotations

import gzip
import warnings

import pandas as pd
import pytest

import airhealth
from airhealth.cli.main import main
from airhealth.errors import SpecificationError
from airhealth.report.city_report import report_content

F = ["--outcome", "deaths_all", "--exposure", "pm25", "--temperature", "temperature"]


@pytest.fixture(scope="module")
def two_years() -> pd.DataFrame:
    data = airhealth.load_sample()
    return data[data["date"] < "2012-01-01"].reset_index(drop=True)


def test_a_hac_report_says_which_intervals_it_shows(two_years):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        content = report_content(
            two_years, outcomes=["deaths_all"], exposures=["pm25"], lags=["0-1"], temperature="temperature",
            interval="hac",
        )  # fmt: skip
    texts = " ".join(b.text for s in content.sections for b in s.blocks if hasattr(b, "text"))
    assert "Newey–West (HAC) standard errors" in texts
    assert set(content.effects["interval"]) == {"hac"}


def test_a_compressed_csv_reads_as_the_plain_file(two_years, tmp_path, capsys):
    plain, packed = tmp_path / "city.csv", tmp_path / "city.csv.gz"
    two_years.to_csv(plain, index=False, date_format="%Y-%m-%d")
    packed.write_bytes(gzip.compress(plain.read_bytes()))
    outputs = []
    for path in (plain, packed):
        assert main(["fit", str(path), *F, "--trend-df-per-year", "4", "--json"]) == 0
        outputs.append(capsys.readouterr().out)
    assert outputs[0] == outputs[1]


def test_align_refuses_numeric_codes_it_cannot_keep_out_of_counts(tmp_path, capsys):
    counts = tmp_path / "counts.csv"
    pd.DataFrame(
        {"date": pd.date_range("2020-01-01", periods=5).strftime("%Y-%m-%d"), "deaths": [0, 3, 0, 2, 1]}
    ).to_csv(counts, index=False)
    assert main(["align", str(counts), "--na-values", "0", "--out", str(tmp_path / "out.csv")]) == 2
    assert "align takes text codes only" in capsys.readouterr().err
    assert not (tmp_path / "out.csv").exists()


def test_align_merges_duplicated_days_when_asked(tmp_path, capsys):
    dates = ["2020-01-01", "2020-01-02", "2020-01-02", "2020-01-03"]
    table = tmp_path / "t.csv"
    pd.DataFrame({"date": dates, "pm25": [1.0, 2.0, 4.0, 5.0]}).to_csv(table, index=False)
    out = tmp_path / "out.csv"
    assert main(["align", str(table), "--out", str(out)]) == 2
    assert "--duplicates mean" in capsys.readouterr().err
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        assert main(["align", str(table), "--duplicates", "mean", "--out", str(out)]) == 0
    assert pd.read_csv(out)["pm25"].tolist() == [1.0, 3.0, 5.0]


def test_write_report_refuses_one_unit_for_several_exposures(two_years, tmp_path):
    with pytest.raises(SpecificationError, match=r"units=\{'pm25': 'ppb'\}"):
        airhealth.write_report(
            two_years, outcomes=["deaths_all"], exposures=["pm25", "o3"], lags=["0"], out=tmp_path / "r",
            temperature="temperature", unit="ppb",
        )  # fmt: skip


def test_large_totals_read_in_full_in_the_html_tables():
    from airhealth.report.numbers import format_number

    assert format_number(179300.0) == "179,300" and format_number(1.0084) == "1.008"
    assert format_number(12.5) == "12.5"


def test_columns_on_several_levels_are_refused_with_the_way_to_flatten_them(two_years):
    from airhealth.errors import DataError

    data = two_years.copy()
    data.columns = pd.MultiIndex.from_tuples([(c, "") for c in data.columns])
    with pytest.raises(DataError, match="MultiIndex"):
        airhealth.fit(data, "deaths_all", "pm25")


def test_report_lists_an_exposure_with_text_codes_as_failed_and_completes_the_rest(two_years, tmp_path, capsys):
    # Reviewed case: a '<LOD' in one exposure refused the whole command-line report at read time, while Python
    # write_report listed that exposure as failed; both now list it and complete the other exposure.
    data = two_years.astype({"no2": object})
    data.loc[[10, 20], "no2"] = "<LOD"
    path = tmp_path / "city.csv"
    data.to_csv(path, index=False, date_format="%Y-%m-%d")
    out = tmp_path / "report"
    args = ["report", str(path), "--outcome", "deaths_all", "--exposure", "pm25", "--exposure", "no2"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        code = main([*args, "--temperature", "temperature", "--lags", "0", "--out", str(out)])
    assert code == 0, capsys.readouterr().err
    failed = pd.read_csv(out / "tables" / "failed_analyses.csv")
    assert failed["exposure"].tolist() == ["no2"] and "<LOD" in failed["error"].iloc[0]
    assert pd.read_csv(out / "tables" / "effects.csv")["exposure"].tolist() == ["pm25"]
