"""Reading the CSV files the commands are given, with errors a user can act on.

Nothing is guessed: a wrong guess of a separator, a decimal mark, an encoding or a date order would be
silent, and its damage would show far from the cause. Instead, a file that looks like it needs an option
is refused with a message naming the option (``--sep``, ``--decimal``, ``--encoding``, ``--na-values``).
"""

from __future__ import annotations

import io
import re
import sys
from collections.abc import Mapping, Sequence
from pathlib import Path

import numpy as np
import pandas as pd

from .._io import EXACT_FLOATS
from ..errors import DataError

__all__ = ["STDIN", "check_numeric_columns", "read_table"]

#: The path that means "read the table from standard input".
STDIN = "-"

_SHOW = 5
_DECIMAL_COMMA = re.compile(r"^\s*[+-]?\d+,\d+\s*$")
_SEPARATORS = {";": "--sep ';'", "\t": "--sep tab", "|": "--sep '|'"}


def _head(raw: bytes, encoding: str, lines: int = 6) -> list[str]:
    """The first lines of the file as text (undecodable bytes replaced), for diagnosing a bad read."""
    try:
        text = raw[:65536].decode(encoding, errors="replace")
    except LookupError:
        return []
    return text.splitlines()[:lines]


def _separator_hint(raw: bytes, sep: str, encoding: str) -> str:
    """Advice on ``--sep`` / ``--decimal`` when the first lines suggest another layout, else ""."""
    head = _head(raw, encoding)
    if not head:
        return ""
    for mark, option in _SEPARATORS.items():
        if mark != sep and head[0].count(mark) >= 1 and head[0].count(mark) >= head[0].count(sep):
            decimal = (
                " --decimal , (a comma)" if mark == ";" and any(re.search(r"\d,\d", line) for line in head[1:]) else ""
            )
            return f" The file seems to use {mark!r} as separator: pass {option}{decimal}."
    if sep == "," and any(re.search(r"\d,\d", line) for line in head[1:]):
        counts = {line.count(",") for line in head[1:] if line}
        if len(counts) > 1 or (counts and max(counts) != head[0].count(",")):
            return (
                " Some numbers seem to be written with a decimal comma (e.g. 12,5), which also separates the "
                "fields: save the file with ';' as separator and pass --sep ';' --decimal , (a comma)."
            )
    return ""


def _encoding_error(path: Path, raw: bytes, encoding: str) -> DataError:
    """Where the file stops being ``encoding`` text, and the option to read it."""
    try:
        raw.decode(encoding)
        where = ""
    except UnicodeDecodeError as inner:
        line = raw[: inner.start].count(b"\n") + 1
        text = raw.splitlines()[line - 1].decode(encoding, errors="replace")
        where = f" (byte 0x{raw[inner.start]:02x} on line {line}: {text[:60]!r})"
    return DataError(
        f"{str(path)!r} is not {encoding} text{where}. It is probably Latin-1 or Windows-1252, as some "
        "spreadsheets save: pass --encoding latin-1 (or --encoding cp1252)."
    )


def _refuse_repeated_names(path: Path, raw: bytes, sep: str, encoding: str) -> None:
    """A name given twice in the header (pandas would silently rename the second ``name.1``)."""
    header = pd.read_csv(io.BytesIO(raw), sep=sep, header=None, nrows=1, encoding=encoding, dtype=str)
    header = header.iloc[0].tolist()
    names = [str(h) for h in header]
    for name in dict.fromkeys(names):
        places = [i + 1 for i, n in enumerate(names) if n == name]
        if len(places) > 1:
            raise DataError(
                f"the header of {str(path)!r} names {name!r} {len(places)} times (columns "
                f"{', '.join(map(str, places))}); rename or remove all but one."
            )


def _read_bytes(path: Path) -> bytes:
    """The whole file, read once: a pipe or process substitution (``<(...)``) cannot be read twice, and
    ``-`` is standard input."""
    if str(path) == STDIN:
        return sys.stdin.buffer.read()
    if not path.exists():
        raise DataError(f"file {str(path)!r} does not exist.")
    if path.is_dir():
        raise DataError(f"{str(path)!r} is a directory; give the path of a CSV file.")
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise DataError(f"could not read {str(path)!r}: {exc.strerror or exc}.") from exc
    return _decompressed(path, raw)


def _decompressed(path: Path, raw: bytes) -> bytes:
    """The bytes of a compressed file (``.gz``, ``.bz2``, ``.xz``, ``.zip`` with one member) uncompressed."""
    import bz2
    import gzip
    import lzma
    import zipfile

    suffix = path.suffix.lower()
    try:
        if suffix == ".gz":
            return gzip.decompress(raw)
        if suffix == ".bz2":
            return bz2.decompress(raw)
        if suffix == ".xz":
            return lzma.decompress(raw)
        if suffix == ".zip":
            with zipfile.ZipFile(io.BytesIO(raw)) as archive:
                members = [m for m in archive.namelist() if not m.endswith("/")]
                if len(members) != 1:
                    raise DataError(f"{str(path)!r} holds {len(members)} files; give a zip file with one CSV.")
                return archive.read(members[0])
    except (OSError, EOFError, lzma.LZMAError, zipfile.BadZipFile) as exc:
        raise DataError(f"could not uncompress {str(path)!r} ({suffix}): {exc}.") from exc
    return raw


def read_table(
    path: Path,
    sep: str = ",",
    decimal: str = ".",
    na_values: Sequence[str] | Mapping[str, Sequence[str]] | None = None,
    encoding: str = "utf-8",
) -> pd.DataFrame:
    """Read a CSV, turning I/O and parse failures into a clear error that names the option to pass.

    Parameters
    ----------
    path : Path
        The CSV file (``-``: standard input). It is read once, as bytes, so pipes and process substitution
        work.
    sep, decimal : str
        Field separator and decimal mark (``--sep``, ``--decimal``).
    na_values : sequence of str, or mapping of column to them, optional
        Further texts meaning "missing" (``--na-values``), in every column or in the columns named, besides
        pandas' defaults (empty, ``NA``, ``NaN``, ``null``, ...).
    encoding : str
        Text encoding of the file (``--encoding``; default UTF-8).

    Raises
    ------
    DataError
        For a missing file or a directory, an empty or header-only file, a file that is not ``encoding`` text
        (suggesting ``--encoding latin-1``), a parse error or a file read as one column whose header holds
        ``;``, a tab or ``|`` (suggesting ``--sep`` and, for decimal commas, ``--decimal``).
    """
    raw = _read_bytes(path)
    try:
        table = pd.read_csv(
            io.BytesIO(raw),
            sep=sep,
            decimal=decimal,
            na_values=na_values,
            encoding=encoding,
            **EXACT_FLOATS,
        )
    except UnicodeDecodeError as exc:
        raise _encoding_error(path, raw, encoding) from exc
    except LookupError as exc:
        raise DataError(f"unknown encoding {encoding!r}; use e.g. utf-8, latin-1 or cp1252.") from exc
    except pd.errors.EmptyDataError as exc:
        raise DataError(f"{str(path)!r} is empty: it has no header and no rows.") from exc
    except ValueError as exc:  # ParserError, bad options
        raise DataError(f"could not read {str(path)!r} as CSV: {exc}.{_separator_hint(raw, sep, encoding)}") from exc
    except OSError as exc:
        raise DataError(f"could not read {str(path)!r}: {exc.strerror or exc}.") from exc
    if table.shape[1] == 1:
        hint = _separator_hint(raw, sep, encoding)
        if hint:
            raise DataError(f"{str(path)!r} was read as one column named {str(table.columns[-1])!r}.{hint}")
    if not isinstance(table.index, pd.RangeIndex):  # pandas made the extra first field of each row the index
        raise DataError(
            f"the rows of {str(path)!r} have more fields than its header ({', '.join(map(str, table.columns[:8]))})."
            + (_separator_hint(raw, sep, encoding) or " Check the separator (--sep) and the header line.")
        )
    _refuse_repeated_names(path, raw, sep, encoding)
    if table.empty:
        header = ", ".join(str(c) for c in table.columns[:10])
        raise DataError(f"{str(path)!r} has a header ({header}) but no rows of data.")
    return table


def _not_numbers(values: pd.Series) -> np.ndarray:
    """Rows holding something (not missing) that is not a number."""
    present = values.notna().to_numpy()
    numbers = pd.to_numeric(values, errors="coerce").notna().to_numpy()
    return present & ~numbers


def check_numeric_columns(
    frame: pd.DataFrame, columns: Sequence[str], where: str, dates: pd.DatetimeIndex | None = None
) -> None:
    """Refuse text in columns that must hold numbers, naming the values, their dates and the option to pass.

    Decimal commas (``12,5``) point at ``--decimal ,``; other text (``<LOD``, ``n.d.``, ``-``) at
    ``--na-values`` if it means "missing". Rows are named by date when ``dates`` is given, else by CSV line.
    """
    for column in dict.fromkeys(columns):
        values = frame[column]
        if pd.api.types.is_numeric_dtype(values) or pd.api.types.is_bool_dtype(values):
            continue
        bad = _not_numbers(values)
        if not bad.any():
            continue
        rows = np.flatnonzero(bad)
        texts = values.iloc[rows].astype(str)
        at = [f"{d:%Y-%m-%d}" for d in dates[rows[:_SHOW]]] if dates is not None else [f"line {r + 2}" for r in rows]
        listing = ", ".join(f"{t!r} ({a})" for t, a in zip(texts[:_SHOW], at[:_SHOW], strict=False))
        more = f" and {len(rows) - _SHOW} more" if len(rows) > _SHOW else ""
        lead = f"column {column!r} in {where} must hold numbers but has text: {listing}{more}."
        if texts.str.match(_DECIMAL_COMMA).all():
            raise DataError(f"{lead} These look like numbers with a decimal comma: pass --decimal , (a comma).")
        distinct = list(dict.fromkeys(texts.str.strip()))
        codes = ",".join(distinct[:_SHOW])
        raise DataError(
            f"{lead} If {'this means' if len(distinct) == 1 else 'these mean'} 'missing' (e.g. below the limit "
            f"of detection), pass --na-values '{codes}'; otherwise correct the values in the file."
        )
