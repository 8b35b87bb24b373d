"""Write the input table of ``tests/reference/dl_reference.R`` from the shipped Norhaven sample.

Invocation (from the repository root)::

    python tests/reference/make_dl_input.py /tmp/dl_input.csv

The table has one row per calendar day (the sample's calendar is complete) with ``date``, ``deaths_all``,
``pm25`` and ``temperature``; missing values are written as ``NA`` so that R reads them as missing.
Numbers are written with 17 significant digits (the sample holds values rounded to 0.1 anyway).
"""

from __future__ import annotations

from pathlib import Path

from r_input import main, write_r_csv

from airhealth.sample import load_sample

COLUMNS = ("date", "deaths_all", "pm25", "temperature")


def write_input(path: str | Path) -> Path:
    """Write the R input CSV to ``path`` and return it."""
    return write_r_csv(load_sample()[list(COLUMNS)], path)


if __name__ == "__main__":
    main(write_input, "make_dl_input.py")
