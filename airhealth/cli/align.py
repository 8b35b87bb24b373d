"""``airhealth align COUNTS.csv POLLUTION.csv WEATHER.csv --out DAILY.csv``: one daily table from several.

The tables are joined on one complete daily calendar by :func:`airhealth.align_daily` (same checks: dates
read and daily, no date twice in a table, no column in two tables); days absent from a table get empty
cells in its columns. The result is written atomically with ISO dates, ready for ``airhealth fit`` and
``airhealth report``.
"""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from .._io import write_with
from ..errors import DataError
from ..prep.align import align_daily, merge_duplicate_days
from ..prep.validate import parse_dates, require_columns
from .options import add_layout_options, parse_na_values
from .tables import read_table

__all__ = ["register", "run"]


def register(sub: Any) -> None:
    """Add the ``align`` sub-command."""
    p = sub.add_parser(
        "align",
        help="merge daily tables (counts, pollution, weather) into one",
        description="Join daily CSV tables on one complete calendar, one row per day; days absent from a table "
        "get empty cells in its columns. Nothing is dropped or shifted.",
    )
    p.add_argument("tables", nargs="+", type=Path, metavar="TABLE.csv", help="daily tables, each with a date column")
    p.add_argument("--out", required=True, type=Path, metavar="DAILY.csv", help="output CSV (its folder must exist)")
    p.add_argument("--date", default="date", metavar="COL", help='date column of every table (default "date")')
    p.add_argument("--start", metavar="DATE", help="first day of the calendar (default: the earliest date)")
    p.add_argument("--end", metavar="DATE", help="last day of the calendar (default: the latest date)")
    g = p.add_argument_group("reading the files (the same for every table)")
    add_layout_options(g)
    g.add_argument(
        "--na-values",
        nargs="+",
        metavar="CODE",
        help="texts meaning missing in every table, e.g. '<LOD' NA; numeric codes such as -999 are declared "
        "where the data are fitted (fit/report --na-values), where counts are told from pollutant columns",
    )
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """Read, align and write; returns the exit code."""
    parent = args.out.parent
    if not parent.is_dir():
        raise DataError(f"cannot write {str(args.out)!r}: folder {str(parent)!r} does not exist; create it first.")
    names = [p.name for p in args.tables]
    if len(set(names)) < len(names):
        names = [str(p) for p in args.tables]
    if any(p.resolve() == args.out.resolve() for p in args.tables if p.exists()):
        raise DataError(f"--out {str(args.out)!r} is one of the input tables; write the result to a new file.")
    sep = "\t" if args.sep in ("tab", "\\t") else args.sep
    texts, values = parse_na_values(args.na_values)
    numeric = [t for t, v in zip(texts, values, strict=True) if not isinstance(v, str)]
    if numeric:  # align cannot tell counts from pollutant columns; a code 0 would erase days with no deaths
        raise DataError(
            f"align takes text codes only (e.g. '<LOD'); numeric codes ({', '.join(numeric)}) are declared where "
            "the data are fitted, where outcome counts are told apart: airhealth fit/report ... --na-values "
            f"{' '.join(numeric)}."
        )
    tables = []
    for path, name in zip(args.tables, names, strict=True):
        table = read_table(path, sep=sep, decimal=args.decimal, na_values=texts or None, encoding=args.encoding)
        require_columns(table, [args.date], name)
        table = table.assign(**{args.date: parse_dates(table, args.date, name, date_format=args.date_format)})
        tables.append(merge_duplicate_days(table, args.duplicates, args.date, name))
    daily = align_daily(*tables, date=args.date, names=tuple(names), start=args.start, end=args.end)
    write_with(args.out, lambda tmp: daily.to_csv(tmp, index=False, date_format="%Y-%m-%d"), make_parents=False)
    first, last = daily[args.date].iloc[[0, -1]]
    incomplete = int(daily.drop(columns=args.date).isna().any(axis=1).sum())
    print(
        f"wrote {args.out}: {len(daily)} days from {first:%Y-%m-%d} to {last:%Y-%m-%d}, "
        f"{daily.shape[1] - 1} columns from {len(tables)} table{'' if len(tables) == 1 else 's'}; "
        f"{incomplete} days have an empty cell."
    )
    return 0
