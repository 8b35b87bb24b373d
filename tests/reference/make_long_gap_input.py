"""Write the input table of ``tests/reference/long_gap_reference.R``: a simulated city with a year-long gap.

Invocation (from the repository root)::

    python tests/reference/make_long_gap_input.py /tmp/long_gap_input.csv

Five invented years (2012-2016) from :func:`airhealth.simulate.simulate_city` with a fixed seed, merged
on the complete daily calendar by :func:`airhealth.align_daily`; the exposure (``pm25``) is then removed
for the whole of 2014, a year-long gap in the middle of the series (as when a monitor is out of service).
Columns ``date``, ``deaths_all``, ``pm25``, ``temperature``; missing values are written as ``NA`` so that R
reads them as missing, numbers with 17 significant digits.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
from r_input import main, simulated_daily, write_r_csv

SEED = 20261208
PERIOD = ("2012-01-01", "2016-12-31")
GAP = ("2014-01-01", "2014-12-31")  # no exposure on these days (inclusive)
COLUMNS = ("date", "deaths_all", "pm25", "temperature")


def gapped_city() -> pd.DataFrame:
    """The daily table with the exposure missing throughout :data:`GAP`."""
    data = simulated_daily(SEED, PERIOD, COLUMNS)
    data.loc[data["date"].between(*GAP), "pm25"] = np.nan
    return data


def write_input(path: str | Path) -> Path:
    """Write the R input CSV to ``path`` and return it."""
    return write_r_csv(gapped_city(), path)


if __name__ == "__main__":
    main(write_input, "make_long_gap_input.py")
