"""Missing-value codes and text in numeric columns.

Monitoring networks and registries mark a missing day in many ways: a number such as ``-999`` or ``9999``
(a *sentinel*), or text such as ``"NA"``, ``"n/a"`` or ``"<LOD"`` (below the limit of detection). Left in a
numeric column, a sentinel is read as a real concentration and silently changes the estimate (three
``-999`` days among 1 100 move a relative risk per 10 µg/m³ from 1.0080 to 1.0009). This module

- turns the values the user declares as missing (``na_values``) into missing values, on a copy;
- turns text columns holding numbers into numbers, and names any remaining text (with its first dates);
- detects common sentinels left in a series, far outside the rest of it, and names them with the remedy.

Every problem is a :class:`~airhealth.errors.DataError` naming the column, the values, how many days and the
first dates, and the option that fixes it (``na_values=[...]`` in Python, ``--na-values`` on the command line).
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np
import pandas as pd

from .._warn import warn_user
from ..errors import DataError, DataWarning
from .validate import _fmt_dates, _listing

__all__ = [
    "SENTINEL_CODES",
    "TEXT_MISSING",
    "apply_na_values",
    "check_missing_codes",
    "find_missing_codes",
    "format_value",
]

#: Text read as missing without being declared: the strings ``pandas.read_csv`` reads as missing by default
#: (pandas ``io.parsers`` documentation, ``na_values``: "", "#N/A", "N/A", "NA", "NULL", "NaN", "nan", "n/a",
#: "null", "None", "-NaN", "-nan", "1.#IND", "1.#QNAN", "<NA>", "#NA", "-1.#IND", "-1.#QNAN", "#N/A N/A"), so a
#: frame built in Python reads like the same table read from a CSV file. Any other text is an error.
TEXT_MISSING = frozenset(
    {
        "",
        "#N/A",
        "#N/A N/A",
        "#NA",
        "-1.#IND",
        "-1.#QNAN",
        "-NaN",
        "-nan",
        "1.#IND",
        "1.#QNAN",
        "<NA>",
        "N/A",
        "NA",
        "NULL",
        "NaN",
        "None",
        "n/a",
        "nan",
        "null",
    }
)

#: Numbers commonly used as missing-value codes in environmental and health data (common practice, no
#: source). A code is reported only when it stands far outside the rest of its series (see
#: :func:`find_missing_codes`), so a real value that happens to equal a code is not flagged.
SENTINEL_CODES = (-99999.0, -9999.0, -999.0, -99.0, -9.0, -1.0, 999.0, 9999.0, 99999.0)

#: Tukey's "far out" fences: beyond Q1 − 3·IQR or Q3 + 3·IQR (Tukey JW, 1977, Exploratory Data Analysis,
#: Addison-Wesley, ch. 2; from memory). A code inside the fences is left alone.
FAR_OUT = 3.0

#: Fewest other values needed to judge whether a code stands apart (common practice, no source).
MIN_OTHERS = 5


def format_value(value: object) -> str:
    """A value as a user would type it: ``-999`` rather than ``-999.0``, text quoted."""
    if isinstance(value, str):
        return repr(value)
    v = float(value)  # type: ignore[arg-type]
    return str(int(v)) if v.is_integer() and abs(v) < 1e15 else f"{v:g}"


@dataclass(frozen=True)
class _Codes:
    numbers: frozenset[float]
    texts: frozenset[str]


def _split_codes(na_values: Iterable[object]) -> _Codes:
    """Declared codes as numbers (matched by value) and texts (matched after stripping spaces).

    A text that reads as a number (``"-999"``, as given on the command line) matches that number too.
    """
    numbers: set[float] = set()
    texts: set[str] = set()
    for value in na_values:
        if isinstance(value, str):
            texts.add(value.strip())
            try:
                numbers.add(float(value))
            except ValueError:
                pass
        else:
            numbers.add(float(value))  # type: ignore[arg-type]
    return _Codes(frozenset(numbers), frozenset(texts))


def _is_text(values: pd.Series) -> bool:
    return pd.api.types.is_object_dtype(values) or pd.api.types.is_string_dtype(values)


def _text_message(column: str, shown: list[str], n_bad: int, first: str) -> str:
    """The error for text in a numeric column: numbers with a decimal comma point at ``decimal=','`` (never
    at ``na_values``, which would erase them); other text at ``na_values`` if it means "missing"."""
    commas = [v for v in shown if _reads_with_decimal_comma(v)]
    others = [v for v in shown if not _reads_with_decimal_comma(v)]
    listing = _listing([repr(v) for v in shown])
    lead = f"column {column!r} must be numeric but holds text on {n_bad} day(s): {listing}, on {first}."
    decimal = (
        f" {'These are' if not others else 'Some values, e.g. ' + repr(commas[0]) + ', are'} numbers written with "
        "a decimal comma: read the file with pd.read_csv(path, sep=';', decimal=',') (sep as the file has it; "
        "command line: --decimal ,)."
        if commas
        else ""
    )
    if not others:
        return lead + decimal
    suggestion = ", ".join(repr(v) for v in others[:3])
    return (
        f"{lead}{decimal} If {'the other texts' if commas else 'these'} mean 'missing' (e.g. below the limit of "
        f"detection), declare them: na_values=[{suggestion}] (command line: --na-values {' '.join(others[:3])}); "
        "otherwise correct the values."
    )


def _reads_with_decimal_comma(text: str) -> bool:
    try:
        float(text.replace(",", "."))
    except ValueError:
        return False
    return "," in text


def _text_to_numbers(values: pd.Series, column: str, dates: pd.DatetimeIndex, texts: frozenset[str]) -> pd.Series:
    """Numbers from a text column: declared and standard missing markers become NaN; other text is an error."""
    stripped = values.map(lambda v: v.strip() if isinstance(v, str) else v)
    marker = stripped.map(lambda v: isinstance(v, str) and (v in texts or v in TEXT_MISSING))
    kept = stripped.where(~marker.astype(bool), None)
    numbers = pd.to_numeric(kept.astype(object), errors="coerce")
    bad = numbers.isna().to_numpy() & kept.notna().to_numpy()
    if bad.any():
        shown = list(dict.fromkeys(str(v) for v in kept[bad]))
        first = _listing(_fmt_dates(dates[np.flatnonzero(bad)]), int(bad.sum()))
        raise DataError(_text_message(column, shown, int(bad.sum()), first))
    return numbers.astype(float)


def apply_na_values(
    frame: pd.DataFrame,
    columns: Iterable[str],
    na_values: Iterable[object],
    dates: pd.DatetimeIndex,
    counts: Iterable[str] = (),
) -> pd.DataFrame:
    """``frame`` with declared missing-value codes set missing and text columns made numeric.

    In the ``counts`` columns (the outcome) a declared code that could be a real count (a whole number
    >= 0, e.g. 0 or 9999) is applied only when it stands far outside the column's other values (Tukey's
    far-out fences, as for undeclared codes): 9999 in a series of about 30 deaths a day is a code, while a
    declared 0 must not erase the days with no deaths. A count-like code left in place is warned about.

    Returns a copy when anything changes, ``frame`` itself otherwise (it is never modified).

    Parameters
    ----------
    frame : DataFrame
        Daily frame (not modified).
    columns : iterable of str
        The numeric columns the model reads (the date and categorical columns are left as they are).
    na_values : iterable of number or str
        Values meaning "missing" (e.g. ``[-999, "<LOD"]``); a number matches by value, a text after
        stripping spaces, and a text that reads as a number matches that number.
    dates : DatetimeIndex
        The dates of the rows, for messages.
    counts : iterable of str
        Count columns, where whole non-negative codes are left alone.

    Raises
    ------
    DataError
        If a column still holds text that is not a number, naming the distinct values, their first dates
        and the ``na_values`` option to declare them.

    Examples
    --------
    >>> import pandas as pd
    >>> frame = pd.DataFrame({"pm25": [12.0, -999.0, "<LOD", "8.5"]})
    >>> dates = pd.date_range("2020-01-01", periods=4)
    >>> apply_na_values(frame, ["pm25"], [-999, "<LOD"], dates)["pm25"].tolist()
    [12.0, nan, nan, 8.5]
    """
    codes = _split_codes(na_values)
    columns = [c for c in columns if codes.numbers or _is_text(frame[c])]
    if not columns:
        return frame
    out = frame.copy()
    count_columns = set(counts)
    for column in columns:
        values = out[column]
        if pd.api.types.is_bool_dtype(values):
            continue
        if _is_text(values):
            values = _text_to_numbers(values, column, dates, codes.texts)
        numbers = list(codes.numbers)
        if column in count_columns and pd.api.types.is_numeric_dtype(values):
            numbers = _codes_for_counts(values, column, numbers)
        if numbers and pd.api.types.is_numeric_dtype(values):
            values = values.where(~values.isin(numbers))
        out[column] = values
    return out


def _codes_for_counts(values: pd.Series, column: str, codes: list[float]) -> list[float]:
    """The declared codes to apply to a count column: those that cannot be counts, and count-like codes that
    stand far outside the other counts. Count-like codes present but within the counts are warned about."""
    v = values.to_numpy(dtype=float, na_value=np.nan)
    keep, kept_as_counts = [], []
    for code in codes:
        if code < 0 or code != round(code):
            keep.append(code)
            continue
        present = v == code
        if not present.any():
            continue
        others = v[np.isfinite(v) & ~np.isin(v, codes)]
        if _far_out(code, others)[0]:
            keep.append(code)
        else:
            kept_as_counts.append(code)
    if kept_as_counts:
        shown = ", ".join(format_value(c) for c in kept_as_counts)
        warn_user(
            f"na_values {shown} not applied to the count column {column!r}: there it lies among the other "
            "counts and reads as a real count (e.g. a day with no deaths). Mark missing counts in that column "
            "as empty cells or with a code far outside the counts, such as -999.",
            DataWarning,
        )
    return keep


@dataclass(frozen=True)
class FoundCode:
    """A sentinel found in one column: the value, the days holding it and the rest of the series' quartiles."""

    column: str
    value: float
    dates: tuple[pd.Timestamp, ...]
    q1: float
    q3: float


def _far_out(code: float, others: np.ndarray) -> tuple[bool, float, float]:
    if others.size < MIN_OTHERS:
        return True, float("nan"), float("nan")
    q1, q3 = np.percentile(others, [25, 75])
    spread = q3 - q1
    if spread <= 0:  # a series that is mostly one value: judge by its range, else by its size
        spread = float(np.ptp(others)) or max(abs(float(np.median(others))), 1.0)
    return bool(code < q1 - FAR_OUT * spread or code > q3 + FAR_OUT * spread), float(q1), float(q3)


def find_missing_codes(
    values: np.ndarray, column: str, dates: pd.DatetimeIndex, negative_only: bool = False
) -> list[FoundCode]:
    """Sentinels of :data:`SENTINEL_CODES` in ``values`` that stand far outside the rest of the series.

    A code is flagged when it lies beyond Tukey's far-out fences (Q1 − 3·IQR, Q3 + 3·IQR) of the values that
    are not codes. ``negative_only`` restricts the search to negative codes (for counts, where a large
    positive value can be real).
    """
    v = np.asarray(values, dtype=float)
    finite = np.isfinite(v)
    is_code = np.isin(v, SENTINEL_CODES)
    if not is_code.any():
        return []
    others = v[finite & ~is_code]
    found = []
    for code in SENTINEL_CODES:
        if negative_only and code >= 0:
            continue
        where = np.flatnonzero(v == code)
        if not where.size:
            continue
        far, q1, q3 = _far_out(code, others)
        if far:
            found.append(FoundCode(column, code, tuple(dates[where]), q1, q3))
    return found


def _describe(found: FoundCode) -> str:
    n = len(found.dates)
    days = _listing(_fmt_dates(found.dates), n)
    where = f"column {found.column!r} holds {format_value(found.value)} on {n} day(s): {days}"
    if np.isnan(found.q1):
        return where
    return f"{where}, far outside its other values (middle half {found.q1:g} to {found.q3:g})"


def check_missing_codes(
    frame: pd.DataFrame, columns: Iterable[str], dates: pd.DatetimeIndex, counts: Iterable[str] = ()
) -> None:
    """Raise if a numeric column still holds a common missing-value code far outside its series.

    Parameters
    ----------
    frame : DataFrame
        Daily frame after :func:`apply_na_values`.
    columns : iterable of str
        Numeric columns to search.
    dates : DatetimeIndex
        Dates of the rows, for the message.
    counts : iterable of str
        Count columns. Searched like the others (a code is flagged only far outside the column's other
        values, so 999 in a city with about 900 deaths a day is left alone), except that a count-like code
        (999, 9999, ...) must occur on more than one day: a single extreme day can be a real disaster.

    Raises
    ------
    DataError
        Naming every column, code, number of days and first dates found, and the remedy
        ``na_values=[...]`` (command line ``--na-values``).
    """
    found: list[FoundCode] = []
    for column in columns:
        values = frame[column]
        if not pd.api.types.is_numeric_dtype(values) or pd.api.types.is_bool_dtype(values):
            continue
        v = values.to_numpy(dtype=float, na_value=np.nan)
        codes = find_missing_codes(v, column, dates)
        if column in counts:  # one day of 999 deaths can be a disaster; the same count on several days is a code
            codes = [f for f in codes if f.value < 0 or len(f.dates) > 1]
        found += codes
    if not found:
        return
    codes = sorted({f.value for f in found})
    typed = ", ".join(format_value(c) for c in codes)
    it = "these look like missing-value codes" if len(found) > 1 else "this looks like a missing-value code"
    raise DataError(
        "; ".join(_describe(f) for f in found)
        + f"; {it}, not a measurement. Declare the code(s) as missing with na_values=[{typed}] (command line: "
        f"--na-values {' '.join(format_value(c) for c in codes)}), or correct the values."
    )
