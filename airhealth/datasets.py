"""The aligned sample data set: the three Norhaven tables joined on a complete daily calendar."""

from __future__ import annotations

import pandas as pd

from .prep.align import align_daily
from .sample import load_sample_tables

__all__ = ["load_sample"]


def load_sample() -> pd.DataFrame:
    """Norhaven's daily counts, pollutants and weather (2010–2023) on one complete calendar.

    The invented city's pollution table lacks the rows of a nine-day monitor outage; here those days are
    present with missing pollutant values, as :func:`airhealth.prep.align_daily` guarantees.

    Examples
    --------
    >>> import airhealth
    >>> data = airhealth.load_sample()
    >>> list(data.columns)[:4]
    ['date', 'deaths_all', 'admissions_respiratory', 'admissions_cardiovascular']
    """
    tables = load_sample_tables()
    return align_daily(
        tables["counts"], tables["pollution"], tables["weather"], names=("counts", "pollution", "weather")
    )
