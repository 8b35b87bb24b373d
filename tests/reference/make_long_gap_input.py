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

import sys
from pathlib import Path

import numpy as np
import pandas as pd

from airhealth._io import write_text
from airhealth.prep.align import align_daily
from airhealth.simulate import simulate_city

SEED = 20261208
PERIOD = ("2012-01-01", "2016-12-31")
GAP = ("2014-01-01", "2014-12-31")  # no exposure on these days (inclusive)
COLUMNS = ("date", "deaths_all", "pm25", "temperature")


def gapped_city() -> pd.DataFrame:
    """The daily table with the exposure missing throughout :data:`GAP`."""
    tables = simulate_city(seed=SEED, start=PERIOD[0], end=PERIOD[1])
    data = align_daily(tables["counts"], tables["pollution"], tables["weather"])[list(COLUMNS)]
    data.loc[data["date"].between(*GAP), "pm25"] = np.nan
    return data.reset_index(drop=True)


def write_input(path: str | Path) -> Path:
    """Write the R input CSV to ``path`` and return it."""
    data = gapped_city()
    data["date"] = data["date"].dt.strftime("%Y-%m-%d")
    write_text(path, data.to_csv(index=False, na_rep="NA", float_format="%.17g"))
    return Path(path)


if __name__ == "__main__":
    if len(sys.argv) != 2:
        raise SystemExit("usage: python tests/reference/make_long_gap_input.py OUT_CSV")
    print(write_input(sys.argv[1]))
