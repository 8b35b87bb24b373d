"""Days lost in a lag window get the remedy that exists for that kind of lag.

``min_count`` (``--min-count``) exists only for moving averages: a distributed lag or a single day is
told to shorten the window or fill the exposure gaps, never to use an option it refuses. Conversely the
days-per-parameter error of a moving average that lost days in its window names ``min_count`` (and, on
the command line, ``--min-count N``). Common practice, no source: the rules are this package's own.
"""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import airhealth
from airhealth.cli.main import main
from airhealth.errors import DataError, DataWarning

OPTIONS = {"outcome": "deaths_all", "exposure": "pm25", "temperature": "temperature"}


@pytest.fixture
def every_tenth_day_missing(sample: pd.DataFrame) -> pd.DataFrame:
    data = sample[["date", "deaths_all", "pm25", "temperature"]].iloc[:1500].copy()
    data.loc[data.index % 10 == 0, "pm25"] = np.nan
    return data


def _window_warning(data: pd.DataFrame, lag: str) -> str:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        airhealth.fit(data, lag=lag, **OPTIONS)
    texts = [str(w.message) for w in caught if issubclass(w.category, DataWarning) and "lag window" in str(w.message)]
    assert len(texts) == 1, texts
    return texts[0]


def test_a_distributed_lag_is_not_told_to_use_min_count(every_tenth_day_missing):
    text = _window_warning(every_tenth_day_missing, "dl0-5")
    assert "min_count" not in text
    assert "Lag dl0-5 needs the exposure on every day it reads: use a shorter lag window, or fill the gaps" in text


def test_a_moving_average_is_told_to_use_min_count(every_tenth_day_missing):
    text = _window_warning(every_tenth_day_missing, "0-3")
    assert "MovingAverage(first, last, min_count=1)" in text


def test_the_command_line_warning_for_a_distributed_lag_names_no_min_count(every_tenth_day_missing, tmp_path, capsys):
    path = tmp_path / "gaps.csv"
    every_tenth_day_missing.to_csv(path, index=False)
    capsys.readouterr()
    args = ["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25", "--temperature", "temperature"]
    assert main([*args, "--lag", "dl0-5"]) == 0
    err = capsys.readouterr().err
    assert "needs the exposure on every day it reads" in err
    assert "min-count" not in err and "min_count" not in err


def test_days_per_parameter_error_of_a_moving_average_names_min_count(sample, tmp_path: Path, capsys):
    data = sample[["date", "deaths_all", "pm25", "temperature"]].iloc[:1500].copy()
    data.loc[data.index % 5 == 0, "pm25"] = np.nan  # 0-3 keeps 283 days for 49 parameters
    with pytest.raises(
        DataError, match=r"days per parameter.*lag window\. .*MovingAverage\(first, last, min_count=1\)"
    ):
        airhealth.fit(data, lag="0-3", trend_df_per_year=7, **OPTIONS)
    path = tmp_path / "gaps.csv"
    data.to_csv(path, index=False)
    capsys.readouterr()
    args = ["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25", "--temperature", "temperature"]
    assert main([*args, "--lag", "0-3"]) == 2
    assert "[on the command line: --min-count N;" in capsys.readouterr().err
