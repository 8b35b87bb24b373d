"""The report describes the values the models used: declared missing-value codes never reach its tables or figures.

Reviewed case: ``write_report(..., na_values=[-999])`` fitted correctly but Table 1 showed a minimum of -999
and the exposure series plotted spikes to -999; with ``na_values=["<LOD"]`` the whole report failed.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

import airhealth
from airhealth.report.city_report import report_content

ROWS = [100, 400, 700]


@pytest.fixture(scope="module")
def two_years():
    data = airhealth.load_sample()
    return data[data["date"] < "2012-01-01"].reset_index(drop=True)


def _blocks(content):
    return {getattr(b, "name", None): b for s in content.sections for b in s.blocks}


@pytest.mark.parametrize("code", [-999, "<LOD"])
def test_declared_codes_are_missing_in_table_one_and_the_series_figure(two_years, code):
    data = two_years.astype({"pm25": object}) if isinstance(code, str) else two_years.copy()
    data.loc[ROWS, "pm25"] = code
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        content = report_content(
            data, outcomes=["deaths_all"], exposures=["pm25"], lags=["0-1"], temperature="temperature", na_values=[code]
        )
    assert content.failures.empty
    blocks = _blocks(content)
    table_one = blocks["table_one"].frame.set_index("variable")
    clean = two_years["pm25"].drop(index=ROWS)
    assert table_one.loc["pm25", "min"] == pytest.approx(clean.min())
    assert table_one.loc["pm25", "missing"] == two_years["pm25"].isna().sum() + len(ROWS)
    series = blocks["series_pm25"].figure.axes[0].get_lines()[0].get_ydata()
    assert np.nanmin(series) >= 0  # no -999 drawn
