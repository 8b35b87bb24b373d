"""``airhealth burden``: the JSON contract, tables under --out with suppression, presets list, errors; and the
report section and figure of a burden."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.burden import burden, burden_from_estimate
from airhealth.cli.main import main
from airhealth.report.burden_plots import plot_burden_by_month
from airhealth.report.burden_section import burden_section, suppressed_burden_table
from airhealth.report.document import Figure, Table, Text
from airhealth.report.suppression import SUPPRESSED

CONTRACT = {
    "attributable",
    "attributable_low",
    "attributable_high",
    "fraction",
    "fraction_low",
    "fraction_high",
    "n_days",
}


def test_json_from_a_given_coefficient_matches_python(sample_csv: Path, capsys: pytest.CaptureFixture) -> None:
    args = ["--outcome", "deaths_all", "--exposure", "pm25", "--lag", "0", "--coef", "0.0008", "--se", "0.0003"]
    code = main(["burden", str(sample_csv), *args, "--counterfactual", "who-guideline:pm2.5:24h", "--json"])
    assert code == 0
    record = json.loads(capsys.readouterr().out)
    assert CONTRACT <= set(record)
    python = burden_from_estimate(
        airhealth.load_sample(), "deaths_all", "pm25", 0.0008, 0.0003, "who-guideline:pm2.5:24h", lag="0"
    )
    for key in CONTRACT:
        assert record[key] == pytest.approx(python.to_dict()[key], rel=1e-12)
    assert record["counterfactual"] == 15 and "WHO" in record["counterfactual_source"]
    assert record["draws"] == 1000 and "causal" in record["caution"]


def test_json_from_a_fit_with_draws_and_seed(sample_csv: Path, capsys: pytest.CaptureFixture) -> None:
    args = ["--outcome", "deaths_all", "--exposure", "pm25", "--lag", "dl0-3", "--temperature", "temperature"]
    code = main(["burden", str(sample_csv), *args, "--counterfactual", "10", "--draws", "200", "--seed", "3", "--json"])
    assert code == 0
    record = json.loads(capsys.readouterr().out)
    fitted = airhealth.fit(airhealth.load_sample(), "deaths_all", "pm25", lag="dl0-3", temperature="temperature")
    python = burden(fitted, 10, data=airhealth.load_sample(), draws=200, seed=3)
    assert record["attributable_high"] == pytest.approx(python.attributable_high, rel=1e-9)
    assert (record["draws"], record["seed"], record["perspective"]) == (200, 3, "backward")


def test_out_writes_breakdown_tables_with_small_counts_hidden(sample_csv: Path, tmp_path: Path) -> None:
    args = ["--outcome", "admissions_respiratory", "--exposure", "pm25", "--coef", "0.002", "--se", "0.001"]
    out = tmp_path / "tables"
    code = main(
        ["burden", str(sample_csv), *args, "--counterfactual", "15", "--out", str(out), "--suppress-below", "10"]
    )
    assert code == 0
    names = sorted(p.name for p in out.iterdir())
    assert names == [
        "CAUTION.txt", "burden_by_month.csv", "burden_by_season.csv", "burden_by_year.csv", "burden_by_year_month.csv"
    ]  # fmt: skip
    monthly = pd.read_csv(out / "burden_by_year_month.csv", dtype=str)
    # a month's total of cases is hidden exactly when one of its counted days has 1 to 9 admissions
    data = airhealth.load_sample().dropna(subset=["pm25", "admissions_respiratory"])
    counts = data.set_index("date")["admissions_respiratory"]
    has_small = counts.groupby(counts.index.strftime("%Y-%m")).apply(lambda c: ((c > 0) & (c < 10)).any())
    hidden = (monthly.set_index("period")["cases"] == SUPPRESSED).reindex(has_small.index)
    assert hidden.equals(has_small) and has_small.any()
    assert (monthly.loc[monthly["cases"] == SUPPRESSED, "fraction"] == SUPPRESSED).all()
    # attributable numbers are model estimates, not counts: each printed with its interval, never "<10"
    for column in ("attributable", "attributable_low", "attributable_high"):
        assert pd.to_numeric(monthly[column], errors="coerce").notna().all(), column
    assert "causal" in (out / "CAUTION.txt").read_text()


def test_list_counterfactuals_prints_every_preset_with_its_source(capsys: pytest.CaptureFixture) -> None:
    assert main(["burden", "--list-counterfactuals"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert len(lines) == len(airhealth.burden.PRESETS)
    assert any(line.startswith("eu-limit:pm10:24h: 50 µg/m³") and "35 times" in line for line in lines)


def test_command_line_errors_name_the_fix(sample_csv: Path, capsys: pytest.CaptureFixture) -> None:
    base = ["burden", str(sample_csv), "--outcome", "deaths_all", "--exposure", "pm25"]
    assert main([*base, "--coef", "0.001", "--counterfactual", "10"]) == 2
    assert "--coef needs --se: a coefficient without its standard error" in capsys.readouterr().err
    assert main([*base, "--coef", "0.001", "--se", "0.0005", "--counterfactual", "-3"]) == 2
    assert "counterfactual -3 µg/m³ is negative" in capsys.readouterr().err
    assert main([*base, "--coef", "0.001", "--se", "0.0005", "--counterfactual", "10", "--draws", "20"]) == 2
    assert "draws=20: give a whole number of at least 100" in capsys.readouterr().err
    assert main(["burden", str(sample_csv), "--outcome", "deaths_all"]) == 2
    assert "needs --exposure, --counterfactual" in capsys.readouterr().err


def _respiratory_burden() -> object:
    data = airhealth.load_sample()
    return burden_from_estimate(data, "admissions_respiratory", "pm25", 0.002, 0.001, 15)


def test_section_has_the_caution_tables_figure_and_missing_days() -> None:
    result = _respiratory_burden()
    section = burden_section(result)
    texts = " ".join(b.text for b in section.blocks if isinstance(b, Text))
    assert result.caution in texts
    assert "missing exposure" in texts and "not counted as days without excess" in texts
    tables = {b.name: b for b in section.blocks if isinstance(b, Table)}
    assert set(tables) == {"burden_total", "burden_year", "burden_season", "burden_month"}
    assert tables["burden_total"].frame["attributable"].iloc[0] == pytest.approx(result.attributable)
    assert sum(isinstance(b, Figure) for b in section.blocks) == 1


def test_section_hides_small_counts_and_the_fractions_that_would_reveal_them() -> None:
    result = _respiratory_burden()
    table = suppressed_burden_table(result, "month", 10)
    assert (table["cases"] == SUPPRESSED).all()  # daily counts below 10 occur in every calendar month
    assert (table["fraction_low"] == SUPPRESSED).all()
    assert suppressed_burden_table(result, "month", None).equals(result.table("month"))


def test_monthly_figure_draws_every_month_since_estimates_are_not_counts() -> None:
    result = _respiratory_burden()
    ax = plot_burden_by_month(result)
    assert len(ax.patches) == len(result.table("year_month"))  # one bar per month
    assert "per month" in ax.get_ylabel() and "µg/m³" in ax.get_title()
    high = plot_burden_by_month(result, suppress_below=10_000)
    assert len(high.patches) == len(result.table("year_month")) and not high.texts
    section = burden_section(result, suppress_below=10_000)
    figure = next(b for b in section.blocks if isinstance(b, Figure))
    assert figure.note is None


def test_burden_tables_show_each_estimate_with_its_interval_and_hide_fractions_with_their_cases() -> None:
    result = _respiratory_burden()
    estimates = ["attributable", "attributable_low", "attributable_high"]
    fractions = ["fraction", "fraction_low", "fraction_high"]
    for threshold in (10, 20_000):
        table = suppressed_burden_table(result, "year", threshold)
        raw = result.table("year")
        # estimates and their bounds: the model's numbers, unchanged, never "<threshold"
        pd.testing.assert_frame_equal(table[estimates].astype(float), raw[estimates].astype(float))
        hidden = table["cases"] == SUPPRESSED
        assert hidden.all()  # every year has a day with fewer than 10 admissions
        assert (table.loc[hidden, fractions] == SUPPRESSED).all().all()  # cases = AN / AF would be recoverable
    section = burden_section(result, suppress_below=20_000)
    total = next(b for b in section.blocks if isinstance(b, Table) and b.name == "burden_total").frame
    assert total["attributable"].iloc[0] == pytest.approx(result.attributable)
    assert total["attributable_low"].iloc[0] == pytest.approx(result.to_dict()["attributable_low"])
    assert (total[["cases", *fractions]] == SUPPRESSED).all().all()


def test_plot_draws_on_the_given_axes() -> None:
    from matplotlib.figure import Figure as MplFigure

    ax = MplFigure().add_subplot()
    assert plot_burden_by_month(_respiratory_burden(), ax=ax) is ax


def test_results_are_read_only_and_tables_are_copies() -> None:
    result = _respiratory_burden()
    table = result.table("year")
    table.loc[0, "attributable"] = np.nan
    assert np.isfinite(result.table("year")["attributable"]).all()
    with pytest.raises(AttributeError):
        result.attributable = 0.0  # type: ignore[misc]


def test_a_perspective_with_a_given_coefficient_is_refused(sample_csv: Path, capsys: pytest.CaptureFixture) -> None:
    base = ["burden", str(sample_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--counterfactual", "10"]
    assert main([*base, "--coef", "0.001", "--se", "0.0005", "--perspective", "forward"]) == 2
    assert "--perspective forward applies to distributed lags" in capsys.readouterr().err


def test_report_option_writes_an_html_page_with_the_section_and_caution(sample_csv: Path, tmp_path: Path) -> None:
    args = ["--outcome", "deaths_all", "--exposure", "pm10", "--coef", "0.0008", "--se", "0.0003", "--lag", "0"]
    out = tmp_path / "page"
    assert main(["burden", str(sample_csv), *args, "--counterfactual", "eu-limit:pm10:24h", "--report", str(out)]) == 0
    page = (out / "index.html").read_text(encoding="utf-8")
    assert "Attributable burden" in page and "causal" in page
    assert "EU Directive 2008/50/EC" in page
    assert (out / "figures" / "burden_by_month.png").exists()
    assert (out / "tables" / "burden_year.csv").exists()


def test_city_report_takes_the_burden_section_as_an_extra_section(tmp_path: Path) -> None:
    data = airhealth.load_sample()
    result = burden_from_estimate(data, "deaths_all", "pm25", 0.0008, 0.0003, 15, lag="0")
    path = airhealth.write_report(
        data, ["deaths_all"], ["pm25"], lags=["0"], out=tmp_path / "city", extra_sections=[burden_section(result)]
    )
    page = Path(path).read_text(encoding="utf-8") if Path(path).is_file() else (Path(path) / "index.html").read_text()
    assert "Attributable burden" in page and result.caution.split(";")[0] in page


def test_user_text_is_escaped_in_the_notebook_display() -> None:
    data = airhealth.load_sample().rename(columns={"pm25": "<b>pm</b>"})
    result = burden_from_estimate(data, "deaths_all", "<b>pm</b>", 0.0008, 0.0003, 15, lag="0")
    shown = result._repr_html_()
    assert "&lt;b&gt;pm&lt;/b&gt;" in shown and "<b>pm</b>" not in shown


def test_a_fit_with_holidays_and_confounders_gives_its_burden_from_the_data(sample: pd.DataFrame) -> None:
    fitted = airhealth.fit(sample, "deaths_all", "pm25", lag="dl0-2", temperature="temperature", holidays="GB")
    assert burden(fitted, 10, data=sample).n_days > 4000


def test_pollutant_option_is_checked_against_the_preset(sample_csv: Path, capsys: pytest.CaptureFixture) -> None:
    base = ["burden", str(sample_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--coef", "0.001"]
    args = [*base, "--se", "0.0005", "--lag", "0", "--counterfactual", "who-guideline:o3:8h"]
    assert main(args) == 2
    assert "preset 'who-guideline:o3:8h' is for O3, but the exposure 'pm25' is PM2.5" in capsys.readouterr().err
    assert main([*args, "--pollutant", "o3", "--json"]) == 0


@pytest.mark.parametrize("flag", ["--out", "--report"])
def test_an_output_folder_that_is_a_file_exits_2_naming_it(
    sample_csv: Path, tmp_path: Path, capsys: pytest.CaptureFixture, flag: str
) -> None:
    # before, --out onto an existing file ended in a raw FileExistsError traceback after the fit
    taken = tmp_path / "taken.csv"
    taken.write_text("keep me\n", encoding="utf-8")
    base = ["burden", str(sample_csv), "--outcome", "deaths_all", "--exposure", "pm25", "--counterfactual", "15"]
    assert main([*base, "--coef", "0.001", "--se", "0.0005", flag, str(taken / "sub")]) == 2
    err = capsys.readouterr().err
    assert f"{flag} '{taken / 'sub'}': '{taken}' is an existing file, but {flag} takes a folder" in err
    assert "Traceback" not in err and taken.read_text(encoding="utf-8") == "keep me\n"
