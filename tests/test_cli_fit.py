"""The ``airhealth fit`` and ``airhealth demo`` commands: the JSON contract and the written report."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
import pytest

import airhealth
from airhealth.cli.main import main
from airhealth.report.city_report import count_summary

REQUIRED_KEYS = {
    "exposure",
    "lag",
    "per",
    "coef",
    "se",
    "rr",
    "rr_low",
    "rr_high",
    "percent_change",
    "p_value",
    "dispersion",
    "qaic",
    "n_days",
}


def test_fit_json_has_the_contract_keys_and_matches_python(sample_csv: Path, capsys: pytest.CaptureFixture) -> None:
    code = main(
        [
            "fit",
            str(sample_csv),
            "--outcome",
            "deaths_all",
            "--exposure",
            "pm25",
            "--temperature",
            "temperature",
            "--lag",
            "0-1",
            "--json",
        ]
    )
    assert code == 0
    record = json.loads(capsys.readouterr().out)
    assert REQUIRED_KEYS <= set(record)
    expected = airhealth.fit(
        pd.read_csv(sample_csv), outcome="deaths_all", exposure="pm25", lag="0-1", temperature="temperature"
    ).to_dict()
    for key in REQUIRED_KEYS:
        assert (
            record[key] == pytest.approx(expected[key], rel=1e-12)
            if isinstance(expected[key], float)
            else record[key] == expected[key]
        )
    assert record["per"] == 10
    assert record["rr"] == pytest.approx(2.718281828459045 ** (10 * record["coef"]), rel=1e-12)


def test_fit_options_change_the_model(sample_csv: Path, capsys: pytest.CaptureFixture) -> None:
    main(
        [
            "fit",
            str(sample_csv),
            "--outcome",
            "deaths_all",
            "--exposure",
            "pm25",
            "--lag",
            "1",
            "--per",
            "5",
            "--trend-df-per-year",
            "4",
            "--json",
        ]
    )
    record = json.loads(capsys.readouterr().out)
    assert record["lag"] == "1" and record["per"] == 5
    direct = airhealth.fit(
        pd.read_csv(sample_csv), outcome="deaths_all", exposure="pm25", lag="1", trend_df_per_year=4
    ).to_dict(per=5)
    assert record["coef"] == pytest.approx(direct["coef"], rel=1e-12)


def test_fit_bad_column_is_a_one_line_error(sample_csv: Path, capsys: pytest.CaptureFixture) -> None:
    code = main(["fit", str(sample_csv), "--outcome", "deaths_all", "--exposure", "pm2_5"])
    err = capsys.readouterr().err
    assert code == 2
    assert "'pm2_5' does not exist" in err and "Traceback" not in err


def test_fit_missing_file(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    code = main(["fit", str(tmp_path / "nope.csv"), "--outcome", "y", "--exposure", "x"])
    assert code == 2 and "does not exist" in capsys.readouterr().err


@pytest.fixture(scope="module")
def demo_dir(demo_report: Path) -> Path:
    return demo_report  # written once per session (tests/conftest.py), shared with the browser test


def test_demo_writes_report_tables_and_figures(demo_dir: Path) -> None:
    page = (demo_dir / "index.html").read_text(encoding="utf-8")
    assert "not proof of causation" in page
    assert "Counts below 5 are suppressed" in page
    table = pd.read_csv(demo_dir / "tables" / "effects_full.csv")
    assert set(table["lag"].astype(str)) == {"0", "1", "2", "0-1", "dl0-5"}
    assert set(table["exposure"]) == {"pm25", "pm10", "no2", "o3"}
    assert len(table) == 3 * 4 * 5
    assert "Hourly monitoring data: coverage and completeness" in page  # the demo's extra section
    pngs = list((demo_dir / "figures").glob("*.png"))
    assert len(pngs) >= 4 and all(p.stat().st_size > 5000 for p in pngs)
    # the table equals the single fit for one row
    row = table[(table.outcome == "deaths_all") & (table.exposure == "pm25") & (table.lag.astype(str) == "0-1")]
    single = airhealth.fit(
        airhealth.load_sample(), outcome="deaths_all", exposure="pm25", lag="0-1", temperature="temperature"
    )
    assert row["rr"].iloc[0] == pytest.approx(single.effect().rr, rel=1e-9)


def test_demo_suppresses_small_counts(demo_dir: Path) -> None:
    """Counts below the threshold (5) are shown as '<5' in the page and the CSV; totals, means and SDs of an
    outcome with any daily count from 1 to 4 are 'suppressed'; everything else is kept."""
    shown = pd.read_csv(demo_dir / "tables" / "daily_counts.csv", dtype=str).set_index("outcome")
    data = airhealth.load_sample()
    raw = count_summary(data, list(shown.index)).set_index("outcome")
    for outcome in shown.index:
        positive = data[outcome][data[outcome] > 0]
        for col in ("total", "mean", "sd", "min", "p25", "median", "p75", "max"):
            value = raw.loc[outcome, col]
            if col in ("total", "mean", "sd"):
                expected = "suppressed" if positive.min() < 5 else None
            else:
                expected = "<5" if 0 < value < 5 else None
            if expected:
                assert shown.loc[outcome, col] == expected
            else:
                assert float(shown.loc[outcome, col]) == pytest.approx(value, abs=0.005)  # the table rounds to 2
    assert (raw[["min"]].to_numpy() < 5).any(), "the sample should have small daily minima to suppress"
    assert (shown["total"] == "suppressed").any() and (shown["total"] != "suppressed").any()
    assert "&lt;5" in (demo_dir / "index.html").read_text(encoding="utf-8")
