"""Write the input table of ``tests/reference/dl_reference.R`` from the shipped Norhaven sample.

Invocation (from the repository root)::

    python tests/reference/make_dl_input.py /tmp/dl_input.csv

The table has one row per calendar day (the sample's calendar is complete) with ``date``, ``deaths_all``,
``pm25`` and ``temperature``; missing values are written as ``NA`` so that R reads them as missing.
Numbers are written with 17 significant digits (the sample holds values rounded to 0.1 anyway).
"""

from __future__ import annotations

import sys
from pathlib import Path

from airhealth._io import write_text
from airhealth.sample import load_sample

COLUMNS = ("date", "deaths_all", "pm25", "temperature")


def write_input(path: str | Path) -> Path:
    """Write the R input CSV to ``path`` and return it."""
    data = load_sample()[list(COLUMNS)].copy()
    data["date"] = data["date"].dt.strftime("%Y-%m-%d")
    write_text(path, data.to_csv(index=False, na_rep="NA", float_format="%.17g"))
    return Path(path)


if __name__ == "__main__":
    if len(sys.argv) != 2:
        raise SystemExit("usage: python tests/reference/make_dl_input.py OUT_CSV")
    print(write_input(sys.argv[1]))
