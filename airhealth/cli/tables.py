"""Reading the CSV files the commands are given, with errors a user can act on."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from ..errors import DataError

__all__ = ["read_table"]


def read_table(path: Path, sep: str = ",", decimal: str = ".", na_values: list[str] | None = None) -> pd.DataFrame:
    """Read a CSV, turning I/O and parse failures into a clear error.

    The separator is not guessed: a file read as one column whose name holds ``;`` or a tab (a
    semicolon-separated export, common where the decimal mark is a comma) is refused with a message naming
    ``--sep`` and ``--decimal``. Guessing would be silent, and a wrong guess of the decimal mark turns
    numbers into text further on, far from the cause.
    """
    if not path.exists():
        raise DataError(f"file {str(path)!r} does not exist.")
    if path.is_dir():
        raise DataError(f"{str(path)!r} is a directory; give the path of a CSV file.")
    try:
        table = pd.read_csv(path, sep=sep, decimal=decimal, na_values=na_values)
    except ValueError as exc:  # ParserError, EmptyDataError, UnicodeDecodeError, bad options
        raise DataError(f"could not read {str(path)!r} as CSV: {exc}") from exc
    except OSError as exc:
        raise DataError(f"could not read {str(path)!r}: {exc.strerror or exc}.") from exc
    if table.shape[1] == 1:
        header = str(table.columns[0])
        for mark, option in ((";", "--sep ';' (and --decimal , if numbers use a decimal comma)"), ("\t", "--sep tab")):
            if mark in header and mark != sep:
                raise DataError(
                    f"{str(path)!r} was read as one column named {header!r}: the file seems to use "
                    f"{mark!r} as separator. Pass {option}."
                )
    return table
