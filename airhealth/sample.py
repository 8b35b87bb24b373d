"""The invented Norhaven sample tables shipped with airhealth.

Norhaven is a fictional city; its daily tables (2010-01-01 to 2023-12-31) are simulated by
:func:`airhealth.simulate.simulate_city` with seed :data:`SAMPLE_SEED` and written by
``sample_data/generate_sample.py``. The pollutant effects built into them are :data:`SAMPLE_TRUE_EFFECTS`.

The pollution table has about 1.5 % missing values per pollutant and lacks the rows of one nine-day
monitor outage; the counts and weather tables are complete. :func:`load_sample` aligns the three on one
complete daily calendar.
"""

from __future__ import annotations

from importlib.resources import files
from pathlib import Path

import pandas as pd

from .errors import DataError
from .prep.align import align_daily
from .simulate import TRUE_EFFECTS

__all__ = [
    "SAMPLE_END",
    "SAMPLE_FILES",
    "SAMPLE_SEED",
    "SAMPLE_START",
    "SAMPLE_TRUE_EFFECTS",
    "load_sample",
    "load_sample_hourly",
    "load_sample_tables",
    "sample_path",
]

#: Seed, first and last day used to generate the shipped tables.
SAMPLE_SEED = 20261202
SAMPLE_START = "2010-01-01"
SAMPLE_END = "2023-12-31"

#: Table name -> file name inside ``airhealth/data``.
SAMPLE_FILES: dict[str, str] = {
    "counts": "norhaven_counts.csv",
    "pollution": "norhaven_pollution.csv",
    "weather": "norhaven_weather.csv",
}

#: Hourly sample tables (written by ``sample_data/generate_hourly.py``).
HOURLY_FILES: dict[str, str] = {"hourly_no2": "norhaven_hourly_no2.csv"}

#: True pollutant effects in the sample tables (same object as ``airhealth.simulate.TRUE_EFFECTS``).
SAMPLE_TRUE_EFFECTS = TRUE_EFFECTS

_COLUMNS: dict[str, tuple[str, ...]] = {
    "counts": ("date", "deaths_all", "admissions_respiratory", "admissions_cardiovascular"),
    "pollution": ("date", "pm25", "pm10", "no2", "o3"),
    "weather": ("date", "temperature", "humidity"),
}


def _data_directory() -> Path:
    """Locate ``airhealth/data`` through importlib.resources, falling back to this module's directory.

    The fallback covers namespace-package layouts (no ``airhealth/__init__.py``, or an editable install
    whose search path includes a path hook), for which ``importlib.resources.files`` raises.
    """
    try:
        return Path(str(files(__package__).joinpath("data")))
    except (TypeError, NotADirectoryError, ModuleNotFoundError):
        return Path(__file__).resolve().parent / "data"


def sample_path(name: str) -> Path:
    """Return the path of one shipped sample table.

    Parameters
    ----------
    name : str
        ``"counts"``, ``"pollution"``, ``"weather"`` or ``"hourly_no2"``, or the file name itself
        (for example ``"norhaven_counts.csv"``).

    Returns
    -------
    pathlib.Path
        Location of the CSV file inside the installed package.

    Raises
    ------
    DataError
        If ``name`` is not one of the shipped tables, or the file is missing from the installation.
    """
    known = {**SAMPLE_FILES, **HOURLY_FILES}
    file_name = known.get(name, name)
    if file_name not in known.values():
        valid = ", ".join(repr(k) for k in known)
        raise DataError(f"sample table {name!r} does not exist; use one of {valid}.")
    path = _data_directory() / file_name
    if not path.is_file():
        raise DataError(f"sample file {path} is missing; reinstall airhealth or run sample_data/generate_sample.py.")
    return path


def load_sample_tables() -> dict[str, pd.DataFrame]:
    """Read the three Norhaven sample tables.

    Returns
    -------
    dict of str to pandas.DataFrame
        ``"counts"``: date, deaths_all, admissions_respiratory, admissions_cardiovascular (int64);
        ``"pollution"``: date, pm25, pm10, no2, o3 (µg/m³, float, NaN where missing);
        ``"weather"``: date, temperature (°C), humidity (%). ``date`` is ``datetime64[ns]`` in each.
        Fresh frames are returned on every call.

    Examples
    --------
    >>> tables = load_sample_tables()
    >>> list(tables["weather"].columns)
    ['date', 'temperature', 'humidity']
    """
    tables = {}
    for key, columns in _COLUMNS.items():
        path = sample_path(key)
        frame = pd.read_csv(path, parse_dates=["date"], date_format="%Y-%m-%d")
        if tuple(frame.columns) != columns:
            raise DataError(f"{path.name} has columns {list(frame.columns)}; expected {list(columns)}.")
        frame["date"] = frame["date"].astype("datetime64[ns]")
        tables[key] = frame
    return tables


def load_sample_hourly() -> pd.DataFrame:
    """Invented hourly NO2 (ppb) at Norhaven's three monitors, 2022–2023, with outages.

    Columns ``time`` (start of the hour, local standard time, text ``YYYY-MM-DD HH:MM``), ``monitor`` and
    ``no2_ppb``, as written by ``sample_data/generate_hourly.py``; feed it to
    :func:`airhealth.prep.hourly_input.clean_hourly`.
    """
    return pd.read_csv(sample_path("hourly_no2"))


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
