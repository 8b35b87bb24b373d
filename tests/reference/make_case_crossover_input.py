"""Write the input table of ``tests/reference/case_crossover.R`` from the shipped Norhaven sample.

Invocation (from the repository root)::

    python tests/reference/make_case_crossover_input.py /tmp/case_crossover_input.csv

The table holds the first four years of the sample (2010-01-01 to 2013-12-31, one row per calendar day) with
``date``, ``deaths_all``, ``admissions_respiratory``, ``pm25`` and ``temperature``; missing values are
written as ``NA`` so that R reads them as missing. Numbers are written with 17 significant digits.
"""

from __future__ import annotations

from pathlib import Path

import pandas as pd
from r_input import main, write_r_csv

from airhealth.sample import load_sample

COLUMNS = ("date", "deaths_all", "admissions_respiratory", "pm25", "temperature")
LAST_DAY = "2013-12-31"


def input_table() -> pd.DataFrame:
    """The four years of the sample the R script reads (dates as datetimes)."""
    data = load_sample()[list(COLUMNS)]
    return data[data["date"] <= pd.Timestamp(LAST_DAY)].reset_index(drop=True)


def write_input(path: str | Path) -> Path:
    """Write the R input CSV to ``path`` and return it."""
    return write_r_csv(input_table(), path)


if __name__ == "__main__":
    main(write_input, "make_case_crossover_input.py")
