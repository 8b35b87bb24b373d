"""The cities of a multi-city study, from any of the input forms ``fit_cities`` takes.

Every form becomes a list of :class:`CityTask` — a city name and a *source* that loads that city's daily
frame when, and where, it is needed. A source is small and picklable: a worker process (or a dask worker)
receives one city's source, loads the city there, fits it and sends back estimates only.

Input forms
-----------
* a mapping ``{name: DataFrame}`` (or ``{name: CitySource}``);
* one long DataFrame with a city column (``city="..."``);
* a folder of CSV files, one city per file, the name from the file stem (``CsvFolder`` or a path);
* a CSV file with a city column (read once, then split);
* a Parquet file or a folder of Parquet files (a dataset) with a city column: only the city column is read
  here; each worker reads only its own city's rows and the columns the model uses (a pyarrow filter).

Names are stripped of surrounding spaces; two cities whose names are equal after stripping (or, for files,
equal ignoring case, since file systems differ in that) are refused, naming both.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from .._io import EXACT_FLOATS
from ..errors import DataError, SpecificationError

__all__ = ["CitySource", "CityTask", "CsvFile", "CsvFolder", "FrameSource", "ParquetRows", "city_tasks"]


class CitySource:
    """Where one city's daily frame comes from; ``load(columns)`` returns it (a new frame, never shared).

    ``columns`` are the columns the model reads (a hint: a source may return more).
    Subclass it to load cities from elsewhere (a database, say); instances must be picklable.
    """

    def load(self, columns: Sequence[str]) -> pd.DataFrame:  # pragma: no cover - interface
        raise NotImplementedError

    def describe(self) -> str:
        """How the source is named in messages."""
        return type(self).__name__


@dataclass(frozen=True)
class FrameSource(CitySource):
    """A city frame already in memory (it travels to the worker by pickling)."""

    frame: pd.DataFrame = field(repr=False)

    def load(self, columns: Sequence[str]) -> pd.DataFrame:
        return self.frame

    def describe(self) -> str:
        return "a data frame"


@dataclass(frozen=True)
class CsvFile(CitySource):
    """One city's CSV file, read where the city is fitted."""

    path: Path
    sep: str = ","
    decimal: str = "."
    encoding: str = "utf-8"

    def load(self, columns: Sequence[str]) -> pd.DataFrame:
        try:
            return pd.read_csv(self.path, sep=self.sep, decimal=self.decimal, encoding=self.encoding, **EXACT_FLOATS)
        except pd.errors.EmptyDataError:
            raise DataError(f"the file {self.path.name} is empty; give a header row and one row per day.") from None
        except (UnicodeDecodeError, pd.errors.ParserError) as exc:
            raise DataError(
                f"the file {self.path.name} could not be read as {self.encoding} CSV with separator "
                f"{self.sep!r}: {exc}. Give the right sep/encoding."
            ) from None

    def describe(self) -> str:
        return str(self.path)


@dataclass(frozen=True)
class ParquetRows(CitySource):
    """The rows of one city in a Parquet file or dataset, read with a filter on the city column."""

    path: Path
    column: str
    value: Any

    def load(self, columns: Sequence[str]) -> pd.DataFrame:
        import pyarrow.dataset as ds

        dataset = ds.dataset(self.path, format="parquet")
        wanted = list(dict.fromkeys(columns))
        if not set(wanted) <= set(dataset.schema.names):  # read every column, so the model's message lists them all
            wanted = [c for c in dataset.schema.names if c != self.column]
        table = dataset.to_table(columns=wanted, filter=ds.field(self.column) == self.value)
        return table.to_pandas()

    def describe(self) -> str:
        return f"{self.path} ({self.column} == {self.value!r})"


@dataclass(frozen=True)
class CsvFolder:
    """A folder of CSV files (``*.csv``, ``*.csv.gz``), one city per file, named by the file stem.

    The reading options apply to every file; dates and missing-value codes are model options
    (``date``, ``date_format``, ``na_values``) and are checked by the model, as for one city.
    """

    path: Path
    sep: str = ","
    decimal: str = "."
    encoding: str = "utf-8"


@dataclass(frozen=True)
class CityTask:
    """One city to fit: its name, its source and its position in the output."""

    index: int
    name: str
    source: CitySource


def _clean_names(names: Sequence[Any], what: Sequence[str], fold_case: bool) -> list[str]:
    """Names stripped of surrounding spaces; refuse empty names and names that collide after stripping."""
    seen: dict[str, str] = {}
    out = []
    for raw, shown in zip(names, what, strict=True):
        name = str(raw).strip()
        if not name:
            raise DataError(f"{shown} gives an empty city name; give every city a name.")
        key = name.casefold() if fold_case else name
        if key in seen:
            how = "equal ignoring case" if fold_case else "equal once surrounding spaces are removed"
            raise DataError(
                f"two cities have the same name {name!r}: {seen[key]} and {shown} ({how}); "
                "rename one so that every city has its own name."
            )
        seen[key] = shown
        out.append(name)
    return out


def _from_mapping(cities: Mapping[Any, Any]) -> list[CityTask]:
    keys = list(cities)
    names = _clean_names(keys, [f"key {k!r}" for k in keys], fold_case=False)
    tasks = []
    for i, (key, name) in enumerate(zip(keys, names, strict=True)):
        value = cities[key]
        if isinstance(value, CitySource):
            source = value
        elif isinstance(value, pd.DataFrame):
            source = FrameSource(value)
        else:
            raise DataError(
                f"city {name!r} is given as {type(value).__name__}; give a pandas DataFrame with one row per day."
            )
        tasks.append(CityTask(i, name, source))
    return tasks


def _require_city_column(columns: Sequence[Any], city: str | None, what: str) -> str:
    if city is None:
        raise SpecificationError(
            f"{what} is read as one table of several cities: name its city column, e.g. city='city' "
            f"(on the command line --city COL; its columns are {[str(c) for c in columns]}), or give a folder "
            "with one CSV file per city."
        )
    if city not in columns:
        raise DataError(
            f"the city column {city!r} is not in {what}; its columns are {[str(c) for c in columns]}. "
            "Name the column that holds the city names."
        )
    return city


def _from_long_frame(frame: pd.DataFrame, city: str | None, what: str = "the data") -> list[CityTask]:
    column = _require_city_column(list(frame.columns), city, what)
    labels = frame[column]
    if labels.isna().any():
        rows = labels.index[labels.isna()][:5].tolist()
        raise DataError(f"the city column {column!r} of {what} is empty in rows {rows}; give every row its city.")
    stripped = labels.astype(str).str.strip()
    order = list(dict.fromkeys(labels.tolist()))
    names = _clean_names(order, [f"city {v!r}" for v in order], fold_case=False)
    groups = frame.drop(columns=[column]).groupby(stripped.to_numpy(), sort=False)
    return [
        CityTask(i, name, FrameSource(groups.get_group(name).reset_index(drop=True))) for i, name in enumerate(names)
    ]


def _from_folder(folder: CsvFolder) -> list[CityTask]:
    path = Path(folder.path)
    files = sorted(p for p in path.iterdir() if p.is_file() and p.name.lower().endswith((".csv", ".csv.gz")))
    if not files:
        raise DataError(f"the folder {path} holds no CSV files (*.csv); give one file per city.")
    stems = [p.name[: -len(".csv.gz")] if p.name.lower().endswith(".gz") else p.stem for p in files]
    names = _clean_names(stems, [f"file {p.name!r}" for p in files], fold_case=True)
    options = {"sep": folder.sep, "decimal": folder.decimal, "encoding": folder.encoding}
    return [CityTask(i, n, CsvFile(p, **options)) for i, (n, p) in enumerate(zip(names, files, strict=True))]


def _from_parquet(path: Path, city: str | None) -> list[CityTask]:
    import pyarrow.dataset as ds

    try:
        dataset = ds.dataset(path, format="parquet")
        columns = dataset.schema.names
    except Exception as exc:  # pyarrow raises several types for unreadable files
        raise DataError(f"{path} could not be read as a Parquet file or dataset: {exc}") from None
    column = _require_city_column(columns, city, f"the Parquet data {path}")
    values = dataset.to_table(columns=[column]).column(column).unique().to_pylist()
    if any(v is None for v in values):
        raise DataError(f"the city column {column!r} of {path} is empty in some rows; give every row its city.")
    names = _clean_names(values, [f"city {v!r}" for v in values], fold_case=False)
    order = sorted(range(len(names)), key=lambda i: names[i])
    return [CityTask(j, names[i], ParquetRows(path, column, values[i])) for j, i in enumerate(order)]


def _from_path(path: Path, city: str | None) -> list[CityTask]:
    if not path.exists():
        raise DataError(f"{path} does not exist; give a folder of CSV files, a CSV file or a Parquet file.")
    if path.is_dir():
        if any(path.rglob("*.parquet")):
            return _from_parquet(path, city)
        if city is not None:
            raise SpecificationError(
                f"city={city!r} names the city column of one table, but {path} is a folder of CSV files, one city "
                "per file named by the file stem: leave out city, or give the path of one table."
            )
        return _from_folder(CsvFolder(path))
    if path.suffix.lower() in (".parquet", ".pq"):
        return _from_parquet(path, city)
    frame = CsvFile(path).load(())
    return _from_long_frame(frame, city, f"the file {path.name}")


def city_tasks(cities: Any, city: str | None = None) -> list[CityTask]:
    """The cities of ``cities`` (any input form of :func:`~airhealth.cities.fit_cities`), in output order.

    Raises
    ------
    DataError
        No cities, a missing city column (named, with the columns present), duplicate or empty city names.
    SpecificationError
        A long table without ``city``.
    """
    if isinstance(cities, pd.DataFrame):
        tasks = _from_long_frame(cities, city)
    elif isinstance(cities, Mapping):
        if city is not None:
            raise SpecificationError(
                f"city={city!r} names the city column of one table; a mapping's keys are the city names already."
            )
        tasks = _from_mapping(cities)
    elif isinstance(cities, CsvFolder):
        tasks = _from_folder(cities)
    elif isinstance(cities, str | Path):
        tasks = _from_path(Path(cities), city)
    else:
        raise DataError(
            f"cities must be a mapping of name to DataFrame, a DataFrame with a city column, or the path of a "
            f"folder of CSV files or of a Parquet file; got {type(cities).__name__}."
        )
    if not tasks:
        raise DataError("no cities were given; give at least one city.")
    return tasks
