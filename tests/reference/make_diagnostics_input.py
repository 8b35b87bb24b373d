"""Write the input table of ``tests/reference/diagnostics_reference.R``: a simulated city with no missing day.

Invocation (from the repository root)::

    python tests/reference/make_diagnostics_input.py /tmp/diagnostics_input.csv

Three invented years (2015-2017) from :func:`airhealth.simulate.simulate_city` with a fixed seed and no
missing values, merged on the complete daily calendar by :func:`airhealth.align_daily`, so the days used by
a lag-0 fit with temperature control are consecutive (only the first 3 days fall out, for the mean of
temperature at lags 1-3): residual autocorrelations and Newey-West sums then need no rule for gaps.
Columns ``date``, ``deaths_all``, ``pm25``, ``temperature``; numbers with 17 significant digits.
"""

from __future__ import annotations

import sys
from pathlib import Path

import pandas as pd

from airhealth._io import write_text
from airhealth.prep.align import align_daily
from airhealth.simulate import simulate_city

SEED = 20261209
PERIOD = ("2015-01-01", "2017-12-31")
COLUMNS = ("date", "deaths_all", "pm25", "temperature")


def complete_city() -> pd.DataFrame:
    """The daily table of :data:`PERIOD`, every value present."""
    tables = simulate_city(seed=SEED, start=PERIOD[0], end=PERIOD[1], missing_fraction=0.0, outage_days=0)
    data = align_daily(tables["counts"], tables["pollution"], tables["weather"])[list(COLUMNS)]
    return data.reset_index(drop=True)


def write_input(path: str | Path) -> Path:
    """Write the R input CSV to ``path`` and return it."""
    data = complete_city()
    data["date"] = data["date"].dt.strftime("%Y-%m-%d")
    write_text(path, data.to_csv(index=False, na_rep="NA", float_format="%.17g"))
    return Path(path)


if __name__ == "__main__":
    if len(sys.argv) != 2:
        raise SystemExit("usage: python tests/reference/make_diagnostics_input.py OUT_CSV")
    write_input(sys.argv[1])
