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

from pathlib import Path

import pandas as pd
from r_input import main, simulated_daily, write_r_csv

SEED = 20261209
PERIOD = ("2015-01-01", "2017-12-31")
COLUMNS = ("date", "deaths_all", "pm25", "temperature")


def complete_city() -> pd.DataFrame:
    """The daily table of :data:`PERIOD`, every value present."""
    return simulated_daily(SEED, PERIOD, COLUMNS, missing_fraction=0.0, outage_days=0)


def write_input(path: str | Path) -> Path:
    """Write the R input CSV to ``path`` and return it."""
    return write_r_csv(complete_city(), path)


if __name__ == "__main__":
    main(write_input, "make_diagnostics_input.py")
