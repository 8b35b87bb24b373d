"""What the ``make_*_input.py`` scripts share: writing a daily table for R, a simulated city, the command line.

Each script of this folder writes the input CSV of one R reference script; the tables differ, the format
does not: one row per calendar day, ``date`` as ``YYYY-MM-DD``, missing values as ``NA`` (so that R reads
them as missing), numbers with 17 significant digits.
"""

from __future__ import annotations

import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import pandas as pd

from airhealth._io import write_text
from airhealth.prep.align import align_daily
from airhealth.simulate import simulate_city


def write_r_csv(data: pd.DataFrame, path: str | Path) -> Path:
    """Write ``data`` (with a datetime ``date`` column; not modified) as an R input CSV; return the path."""
    out = data.copy()
    out["date"] = out["date"].dt.strftime("%Y-%m-%d")
    write_text(path, out.to_csv(index=False, na_rep="NA", float_format="%.17g"))
    return Path(path)


def simulated_daily(seed: int, period: tuple[str, str], columns: Sequence[str], **options: Any) -> pd.DataFrame:
    """An invented city (:func:`airhealth.simulate.simulate_city`) merged on the daily calendar, ``columns`` only."""
    tables = simulate_city(seed=seed, start=period[0], end=period[1], **options)
    data = align_daily(tables["counts"], tables["pollution"], tables["weather"])[list(columns)]
    return data.reset_index(drop=True)


def main(write_input: Callable[[str], Path], script: str) -> None:
    """The command line of a ``make_*_input.py`` script: ``python tests/reference/SCRIPT OUT_CSV``."""
    if len(sys.argv) != 2:
        raise SystemExit(f"usage: python tests/reference/{script} OUT_CSV")
    print(write_input(sys.argv[1]))
