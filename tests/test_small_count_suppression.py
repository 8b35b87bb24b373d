"""Small-count suppression reaches every count in a report: table cells, the totals and means built from
small counts, and the figures (whose drawn DATA is inspected here, not their pictures)."""

from __future__ import annotations

import re
import warnings

import matplotlib
import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.errors import SpecificationError
from airhealth.report.city_report import report_content
from airhealth.report.data_quality_section import data_quality_section
from airhealth.report.document import Figure, Table
from airhealth.report.html import write_html_report
from airhealth.report.plots import observed_fitted_figure, plot_observed_fitted
from airhealth.report.suppression import SUPPRESSED, counts_for_figure, smallest_positive, suppress_table

matplotlib.use("Agg")


def _iso_week_totals(series: pd.Series) -> np.ndarray:
    """Totals per complete ISO 8601 week (Monday to Sunday; ISO 8601-1:2019, 3.1.1.23), grouped independently
    of the module's pandas periods by the (ISO year, ISO week) of each date; weeks with fewer than 7 days left out."""
    iso = pd.DatetimeIndex(series.index).isocalendar()
    grouped = series.groupby([iso["year"].to_numpy(), iso["week"].to_numpy()])
    return grouped.sum().to_numpy()[grouped.size().to_numpy() == 7]


def _month_totals(series: pd.Series) -> np.ndarray:
    """Totals per complete calendar month; months missing a day are left out."""
    index = pd.DatetimeIndex(series.index)
    grouped = series.groupby([index.year, index.month])
    sizes = grouped.size()
    days = np.array([pd.Period(year=y, month=m, freq="M").days_in_month for y, m in sizes.index])
    return grouped.sum().to_numpy()[sizes.to_numpy() == days]


def _line(ax: object, label: str) -> object:
    lines = [line for line in ax.get_lines() if line.get_label() == label]
    assert len(lines) <= 1
    return lines[0] if lines else None


def _days(values: list[float] | np.ndarray, start: str = "2021-01-04") -> pd.Series:
    return pd.Series(np.asarray(values, dtype=float), index=pd.date_range(start, periods=len(values), freq="D"))


# ---- tables ----------------------------------------------------------------------------------------


def test_small_cells_become_less_than_threshold_and_zero_stays() -> None:
    frame = pd.DataFrame({"min": [0, 3, 5, 12], "label": ["a", "b", "c", "d"]})
    out = suppress_table(frame, 5, counts=("min",))
    assert out["min"].tolist() == [0, "<5", 5, 12]
    assert frame["min"].tolist() == [0, 3, 5, 12], "the caller's table is not changed"


def test_totals_and_means_hide_when_their_smallest_count_is_small() -> None:
    frame = pd.DataFrame({"total": [900.0, 1000.0, 0.0], "mean": [9.0, 10.0, 0.0], "min": [0, 10, 0]})
    # row 0 has a day of 2 (hidden by min = 0), row 1's smallest is 10, row 2 has no positive count at all
    out = suppress_table(frame, 5, counts=("min",), aggregates=("total", "mean"), smallest=(2.0, 10.0, np.nan))
    assert out["total"].tolist() == [SUPPRESSED, 1000.0, 0.0]
    assert out["mean"].tolist() == [SUPPRESSED, 10.0, 0.0]
    assert out["min"].tolist() == [0, 10, 0]


def test_aggregates_without_their_smallest_count_are_suppressed() -> None:
    out = suppress_table(pd.DataFrame({"total": [100.0]}), 5, aggregates=("total",))
    assert out["total"].tolist() == [SUPPRESSED]


def test_only_the_count_rows_of_a_mixed_table_are_suppressed() -> None:
    frame = pd.DataFrame({"variable": ["pm25", "deaths"], "min": [2.1, 2.0], "mean": [13.0, 30.0]})
    out = suppress_table(frame, 5, counts=("min",), aggregates=("mean",), smallest=(2.1, 2.0), rows=[False, True])
    assert out["min"].tolist() == [2.1, "<5"] and out["mean"].tolist() == [13.0, SUPPRESSED]


def test_no_threshold_changes_nothing() -> None:
    frame = pd.DataFrame({"n": [1, 2]})
    assert suppress_table(frame, None, counts=("n",), aggregates=("n",)) is frame


@pytest.mark.parametrize("bad", [0, -5, 2.5, "10", True])
def test_a_threshold_that_is_not_a_whole_number_of_at_least_one_is_refused(bad: object, tmp_path) -> None:
    with pytest.raises(SpecificationError, match=rf"whole number of at least 1 .* not {re.escape(repr(bad))}"):
        suppress_table(pd.DataFrame({"n": [1]}), bad, counts=("n",))
    with pytest.raises(SpecificationError, match="small-count threshold"):
        write_html_report([], tmp_path / "r", small_count_threshold=bad)
    assert not (tmp_path / "r").exists()


def test_smallest_positive_skips_zeros_and_missing() -> None:
    data = pd.DataFrame({"a": [0, 0, 7, 3, np.nan], "b": [0, 0, 0, 0, 0]})
    first, second = smallest_positive(data, ["a", "b"])
    assert first == 3 and np.isnan(second)


# ---- the figure rule -------------------------------------------------------------------------------


def test_daily_counts_are_drawn_when_none_is_small() -> None:
    shown = counts_for_figure(_days([0, 5, 9, 12]), 5)
    assert shown.resolution == "daily" and shown.observed.tolist() == [0, 5, 9, 12] and shown.note == ""


def test_small_days_give_weekly_totals_over_monday_to_sunday() -> None:
    rng = np.random.default_rng(8)
    counts = _days(rng.integers(2, 6, size=70), start="2021-01-06")  # a Wednesday: the first week is partial
    shown = counts_for_figure(counts, 5)
    assert shown.resolution == "weekly"
    np.testing.assert_array_equal(shown.observed.to_numpy(), _iso_week_totals(counts))
    assert len(shown.observed) == 9  # 70 days from a Wednesday: 5 + 9 x 7 + 2 days, the two partial weeks left out
    assert "2 week(s) not fully covered" in shown.note
    assert "weekly totals" in shown.note and "below 5" in shown.note


def test_small_weeks_give_monthly_totals() -> None:
    counts = _days(np.r_[[1] + [0] * 6, np.full(58, 1.0)], start="2021-01-04")  # first week totals 1
    shown = counts_for_figure(counts, 5)
    assert shown.resolution == "monthly"
    np.testing.assert_array_equal(shown.observed.to_numpy(), _month_totals(counts))
    assert "monthly totals" in shown.note and "weekly totals too" in shown.note


def test_small_months_leave_the_counts_out_and_say_so() -> None:
    counts = _days(np.r_[np.zeros(3), [1], np.zeros(56)], start="2021-01-01")  # the 1 on Monday 4 January
    fitted = _days(np.full(60, 0.02), start="2021-01-01")
    shown = counts_for_figure(counts, 5, alongside=fitted)
    assert shown.resolution == "omitted" and shown.observed.empty
    assert shown.note.startswith("Observed counts are left out") and "fitted monthly totals" in shown.note
    np.testing.assert_allclose(shown.alongside.to_numpy(), _month_totals(fitted))


# ---- figures of real fits --------------------------------------------------------------------------


@pytest.fixture(scope="module")
def sample() -> pd.DataFrame:
    return airhealth.load_sample()


@pytest.fixture(scope="module")
def deaths_fit(sample: pd.DataFrame) -> object:
    return airhealth.fit(sample, outcome="deaths_all", exposure="pm25", lag="0", temperature="temperature")


def test_the_measured_case_draws_no_day_below_the_threshold(deaths_fit: object) -> None:
    """--suppress-below 10 hid a minimum of 8 in the table, but the figure still plotted that day's 8."""
    assert deaths_fit.observed.min() == 8, "the sample has a day with 8 deaths"
    unsuppressed = _line(plot_observed_fitted(deaths_fit), "observed").get_ydata()
    assert (unsuppressed == 8).any(), "without a threshold the day is drawn (the check below can fail)"
    ax = plot_observed_fitted(deaths_fit, suppress_below=10)
    observed, fitted = _line(ax, "observed").get_ydata(), _line(ax, "fitted").get_ydata()
    assert not ((observed > 0) & (observed < 10)).any()
    np.testing.assert_array_equal(observed, _iso_week_totals(deaths_fit.observed))
    np.testing.assert_allclose(fitted, _iso_week_totals(deaths_fit.fitted), rtol=1e-12)
    assert "weekly" in ax.get_ylabel() and "weekly totals" in ax.get_title()


def test_the_report_figure_says_which_counts_it_shows(deaths_fit: object) -> None:
    block = observed_fitted_figure(deaths_fit, suppress_below=10)
    assert block.title.startswith("Observed and fitted weekly deaths_all")
    assert block.note.startswith(
        "Shown as weekly totals (weeks, Monday to Sunday) because some daily counts are below 10. "
    )
    assert "week(s) not fully covered by the days used are not drawn." in block.note
    assert observed_fitted_figure(deaths_fit).note is None


def test_a_rare_outcome_is_left_out_of_the_figure(sample: pd.DataFrame) -> None:
    rng = np.random.default_rng(2024)
    data = sample[sample["date"] < "2014-01-01"].copy()
    data["rare"] = rng.binomial(data["deaths_all"].to_numpy(), 0.005)  # about 0.18 a day, 5 a month
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # few events: warned about elsewhere, not the point here
        result = airhealth.fit(data, outcome="rare", exposure="pm25", lag="0", temperature="temperature")
    ax = plot_observed_fitted(result, suppress_below=10)
    assert _line(ax, "observed") is None
    np.testing.assert_allclose(_line(ax, "fitted").get_ydata(), _month_totals(result.fitted), rtol=1e-12)
    block = observed_fitted_figure(result, suppress_below=10)
    assert block.title.startswith("Fitted monthly rare") and "left out" in block.note


def test_the_city_report_applies_the_threshold_to_its_figure_and_count_table(sample: pd.DataFrame) -> None:
    data = sample[sample["date"] < "2013-01-01"]
    content = report_content(
        data, ["admissions_respiratory", "deaths_all"], ["pm25"], ["0"], small_count_threshold=10,
        temperature="temperature",
    )  # fmt: skip
    blocks = [b for s in content.sections for b in s.blocks]
    figure = next(b for b in blocks if isinstance(b, Figure) and b.name == "observed_fitted")
    observed = _line(figure.figure.axes[0], "observed")
    assert observed is None or not ((observed.get_ydata() > 0) & (observed.get_ydata() < 10)).any()
    assert figure.note and "below 10" in figure.note
    counts = next(b for b in blocks if isinstance(b, Table) and b.name == "daily_counts")
    shown = suppress_table(
        counts.frame, 10, counts=counts.count_columns, aggregates=counts.aggregate_columns,
        smallest=counts.smallest_counts,
    ).set_index("outcome")  # fmt: skip
    # admissions_respiratory has days with 1 to 9 admissions: its total, mean and SD are hidden
    assert data["admissions_respiratory"].between(1, 9).any()
    assert shown.loc["admissions_respiratory", ["total", "mean", "sd"]].tolist() == [SUPPRESSED] * 3
    assert shown.loc["admissions_respiratory", "min"] == "<10"
    assert data["deaths_all"].min() >= 10 and shown.loc["deaths_all", "total"] == data["deaths_all"].sum()


def test_a_count_column_in_the_data_section_is_suppressed(sample: pd.DataFrame) -> None:
    data = sample[sample["date"] < "2013-01-01"]
    section = data_quality_section(
        data, ["pm25", "admissions_respiratory"], count_columns=["admissions_respiratory"], suppress_below=10
    )
    table = next(b for b in section.blocks if isinstance(b, Table) and b.name == "table_one").frame
    row = table.set_index("variable").loc["admissions_respiratory"]
    assert data["admissions_respiratory"].between(1, 9).any()
    assert row["mean"] == SUPPRESSED and row["sd"] == SUPPRESSED and row["min"] == "<10"
    assert table.set_index("variable").loc["pm25", "mean"] == pytest.approx(data["pm25"].mean(), abs=5e-4)
    figures = {b.name: b for b in section.blocks if isinstance(b, Figure)}
    assert "season_admissions_respiratory" not in figures, "boxes of daily counts would show the small days"
    drawn = np.concatenate(
        [line.get_ydata() for line in figures["series_admissions_respiratory"].figure.axes[0].get_lines()]
    )
    assert drawn.size and not ((drawn > 0) & (drawn < 10)).any()
    assert "weekly totals" in figures["series_admissions_respiratory"].note
    assert {"series_pm25", "season_pm25"} <= set(figures)


def test_no_complete_period_leaves_the_counts_out() -> None:
    # Ten days from a Wednesday cover no whole month and one whole week whose total is small: nothing may
    # be drawn, and an empty series must not pass for "nothing small".
    shown = counts_for_figure(_days([1, 0, 0, 0, 0, 0, 0, 0, 0, 0], start="2021-01-06"), 5)
    assert shown.resolution == "omitted" and shown.observed.empty


def test_messages_about_an_outcome_follow_the_threshold() -> None:
    # Reviewed case: under --suppress-below 10 a failed analysis said "middle half 0 to 1" of the counts.
    from airhealth.report.suppression import mask_small_numbers

    text = "column 'deaths_all' holds 9999 on 3 day(s): 2010-04-11, far outside its other values (middle half 0 to 1)"
    masked = mask_small_numbers(text, ["deaths_all"], 10)
    assert masked.endswith("(middle half 0 to <10)") and "2010-04-11" in masked and "9999" in masked
    assert mask_small_numbers(text, ["deaths_all"], None) == text  # no threshold: unchanged
    assert mask_small_numbers("exposure 'pm25' lost 5 days", ["deaths_all"], 10) == "exposure 'pm25' lost 5 days"


def test_the_report_masks_small_numbers_in_its_warnings(sample: pd.DataFrame) -> None:
    from airhealth.report.city_report import report_content

    rng = np.random.default_rng(7)
    data = sample[sample["date"] < "2014-01-01"].copy()
    data["rare"] = rng.binomial(data["deaths_all"].to_numpy(), 0.01)  # about 0.35 a day: a few-events warning
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        content = report_content(
            data, outcomes=["rare"], exposures=["pm25"], lags=["0"], temperature="temperature", small_count_threshold=10
        )
    shown = {b.name: b.frame for s in content.sections for b in s.blocks if getattr(b, "name", "") == "warnings"}
    text = " ".join(shown["warnings"].astype(str).to_numpy().ravel())
    assert "few events" in text and "averages <10 per day" in text
