"""Numbers as text by journal conventions (airhealth.report.numbers), against hand-written strings.

Source of every expected string: common journal practice in epidemiology for relative risks, intervals,
p-values and counts (common practice, no source), except "<0.001" for p below 0.001, as in the AMA Manual of
Style, 10th ed. (2007), section 20.8 (which otherwise asks for two decimals; two significant digits are our
choice). The decimals rule is the one documented in ``airhealth/report/numbers.py`` and ``docs/output.md``.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from airhealth.errors import SpecificationError
from airhealth.report.numbers import (
    format_coef,
    format_count,
    format_decimal,
    format_number,
    format_p,
    format_percent_change,
    format_rr,
    rr_decimals,
)
from airhealth.report.tables import format_effects


@pytest.mark.parametrize(
    ("low", "high", "decimals"),
    [
        (0.999, 1.017, 3),  # width 0.018: first significant digit at the 2nd decimal, plus one
        (0.99, 1.17, 2),  # width 0.18
        (0.9991, 1.0009, 4),  # width 0.0018
        (0.5, 3.5, 2),  # wide intervals keep at least 2 decimals
        (0.99999, 1.00001, 6),  # very narrow ones get up to 6, so the bounds still differ in print
        (1.0, 1.0, 6),  # zero width: the most decimals
    ],
)
def test_rr_decimals_follow_the_interval_width(low, high, decimals):
    assert rr_decimals(low, high) == decimals


def test_a_column_of_relative_risks_shares_the_decimals_its_narrowest_interval_needs():
    assert rr_decimals([0.99, 0.999, float("nan")], [1.17, 1.017, float("nan")]) == 3


def test_relative_risk_with_its_interval_in_each_style():
    assert format_rr(1.00834, 0.99912, 1.01721) == "1.008 (0.999 to 1.017)"
    assert format_rr(1.00834, 0.99912, 1.01721, style="brackets") == "1.008 [0.999, 1.017]"
    assert format_rr(1.00834, 0.99912, 1.01721, style="dash") == "1.008 (0.999\u20131.017)"
    assert format_rr(1.0834, 0.9912, 1.1721) == "1.08 (0.99 to 1.17)"
    assert format_rr(1.00834, 0.99912, 1.01721, decimals=2) == "1.01 (1.00 to 1.02)"


def test_an_unknown_interval_style_is_refused_naming_the_valid_ones():
    with pytest.raises(SpecificationError, match=r"style='parens'.*'to', 'brackets', 'dash'"):
        format_rr(1.0, 0.9, 1.1, style="parens")


def test_relative_risks_are_never_written_in_scientific_notation():
    assert format_rr(123456.7, 1000.0, 2000000.0) == "123,456.70 (1,000.00 to 2,000,000.00)"
    assert "e" not in format_rr(1e-7, 1e-8, 1e-6)


def test_percent_change_with_interval_and_a_dash_style_that_does_not_read_as_minus():
    assert format_percent_change(0.834, -0.088, 1.721) == "0.8 (-0.1 to 1.7)"
    assert format_percent_change(0.834, 0.088, 0.921) == "0.83 (0.09 to 0.92)"
    # a dash before a negative bound would read as a range of negatives: "to" is used instead
    assert format_percent_change(0.834, -0.088, 1.721, style="dash") == "0.8 (-0.1 to 1.7)"
    assert format_percent_change(-0.004, -0.5, 0.4, decimals=2) == "0.00 (-0.50 to 0.40)"  # no "-0.00"


@pytest.mark.parametrize(
    ("p", "text"),
    [
        (0.0004, "<0.001"),
        (1e-20, "<0.001"),
        (0.001, "0.0010"),
        (0.0123, "0.012"),
        (0.05, "0.050"),
        (0.0999, "0.10"),  # rounds up to a new decade: still two significant digits
        (0.431, "0.43"),
        (0.996, "1.0"),
        (1.0, "1.0"),
        (float("nan"), ""),
    ],
)
def test_p_values_have_two_significant_digits_and_a_floor_of_0_001(p, text):
    assert format_p(p) == text


def test_counts_have_thousands_separators_and_no_exponent():
    assert format_count(179300.0) == "179,300"
    assert format_count(5) == "5"
    assert format_count(12345678) == "12,345,678"
    assert format_count(np.int64(1000)) == "1,000"
    assert format_count(None) == ""


def test_per_unit_coefficients_in_fixed_form():
    assert format_coef(9.709e-05) == "0.00009709"
    assert format_coef(-0.0012346) == "-0.001235"
    assert format_coef(0.0) == "0"


def test_other_numbers_four_significant_digits_never_scientific():
    assert [format_number(v) for v in (179300.0, 1.0084, 12.5, 9.709e-05, 3, 1234.5)] == [
        "179,300", "1.008", "12.5", "0.00009709", "3", "1,234",
    ]  # fmt: skip
    assert format_number("suppressed") == "suppressed"
    assert format_number(math.inf) == "infinite"
    assert format_decimal(24012.44, 1) == "24,012.4"


def test_effects_view_uses_the_rules_for_every_column():
    table = pd.DataFrame({
        "outcome": ["deaths_all"], "exposure": ["o3"], "lag": ["0-1"], "per": [10.0], "unit": ["ppb"],
        "rr": [1.00834], "rr_low": [0.99912], "rr_high": [1.01721], "p_value": [0.0712],
        "exposure_iqr": [12.3], "rr_iqr": [1.0103], "rr_iqr_low": [0.9989], "rr_iqr_high": [1.0212],
        "dispersion": [1.4331], "qaic": [24012.44], "n_days": [5024],
    })  # fmt: skip
    shown = format_effects(table, labels={"deaths_all": "All-cause deaths"}, level=0.9)
    assert shown.iloc[0].to_dict() == {
        "outcome": "All-cause deaths", "exposure": "o3", "lag": "0-1", "per": "10 ppb",
        "RR (90% CI)": "1.008 (0.999 to 1.017)", "% change (90% CI)": "0.8 (-0.1 to 1.7)",
        "IQR": "12.3 ppb", "RR per IQR (90% CI)": "1.010 (0.999 to 1.021)", "p": "0.071",
        "dispersion": "1.43", "qaic": "24,012.4", "days": 5024,
    }  # fmt: skip
