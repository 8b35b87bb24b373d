"""Options for reading CSV files the same way on every supported pandas."""

from __future__ import annotations

import pandas as pd

__all__ = ["EXACT_FLOATS"]

#: ``pd.read_csv`` options that read numbers exactly as written: pandas < 3's default parser can lose the last
#: digit (``float_precision="round_trip"`` fixes it); pandas 3 reads them exactly by default and deprecates the
#: option (a warning on every read), so nothing is passed there.
EXACT_FLOATS: dict[str, str] = {"float_precision": "round_trip"} if int(pd.__version__.split(".")[0]) < 3 else {}
