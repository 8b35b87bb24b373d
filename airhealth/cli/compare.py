"""``airhealth compare DATA.csv --outcome COL --exposure COL --lags 0,1,0-1,dl0-5 ...``: many models, one table.

Every lag structure of ``--lags`` is fitted with every value of ``--trend-df-per-year`` (one row each) by
:func:`airhealth.studies.compare.compare`, on the days usable by all of them unless ``--all-days``. The
reading and model options are those of ``fit`` (declared once in :mod:`airhealth.cli.options`);
``--trend-df-per-year`` here also takes a list.
"""

from __future__ import annotations

import argparse
import json
import math
import re
import sys
import warnings
from pathlib import Path
from typing import Any

import pandas as pd

from .._io import write_with
from ..errors import SpecificationError
from ..model.bases.lag_structures import LagStructure
from .json_output import json_safe
from .options import (
    DAILY_FILE_HELP,
    add_model_options,
    add_outcome_exposure,
    add_reading_options,
    check_min_count,
    confidence_level,
    model_options,
    parse_units,
    read_daily,
    with_min_count,
)
from .remedies import with_command_line_remedy

__all__ = ["parse_df_list", "parse_lag_list", "register", "run"]

#: Keys of each JSON object, in order (the table's columns; ``hac_lags`` added with ``--interval hac``).
JSON_KEYS = (
    "lag", "trend_df_per_year", "coef", "se", "rr", "rr_low", "rr_high", "p_value", "qaic", "qaic_common",
    "delta_qaic_common", "n_days", "interval", "unit", "per", "outcome", "exposure", "percent_change",
    "dispersion", "n_params", "common_dispersion", "qaic_common_from", "days", "first_day", "last_day",
    "level",
)  # fmt: skip


def register(sub: Any) -> None:
    """Add the ``compare`` sub-command."""
    p = sub.add_parser(
        "compare",
        help="compare lag structures (and time-trend df) for one outcome and one exposure",
        description="Fit one model per lag structure and df per year of the time trend, on the days usable by "
        "all of them, and tabulate the relative risks and QAIC (own and common dispersion).",
        conflict_handler="resolve",  # --trend-df-per-year below replaces fit's single-value option
    )
    p.add_argument("data", type=Path, help=DAILY_FILE_HELP)
    add_outcome_exposure(p)
    p.add_argument(
        "--lags",
        required=True,
        metavar="LIST",
        help='lag structures separated by commas, e.g. 0,1,2,0-1,dl0-5 (use ";" between them when one '
        'contains a comma, e.g. "0;dl0-21:spline:knots=2,5,10")',
    )
    p.add_argument("--all-days", action="store_true", help="fit each model on all of its own usable days "
                   "(default: the days usable by every model, so that QAIC values are comparable)")  # fmt: skip
    p.add_argument("--json", action="store_true", help="print a JSON array, one object per model")
    p.add_argument("--out", type=Path, metavar="FILE.csv", help="also write the full table to this CSV file")
    add_model_options(p)
    p.add_argument(
        "--trend-df-per-year",
        default="7",
        metavar="DF[,DF...]",
        help="df per year of the time spline: one value (default 7) or several, e.g. 4,6,8,10,12",
    )
    add_reading_options(p)
    p.set_defaults(func=run)


def parse_lag_list(text: str, min_count: int | None = None) -> list[LagStructure]:
    """``--lags`` → lag structures: separated by commas, or by ``;`` when any ``;`` is present.

    A comma followed by a plain number continues a ``knots=`` list (``dl0-21:spline:knots=2,5,10``).
    """
    if ";" in text:
        parts = text.split(";")
    else:
        parts = []
        for piece in text.split(","):
            if parts and "knots=" in parts[-1] and re.fullmatch(r"\s*\d+(\.\d*)?\s*", piece):
                parts[-1] += "," + piece
            else:
                parts.append(piece)
    labels = [p.strip() for p in parts]
    if not any(labels):
        raise SpecificationError(f"--lags {text!r} names no lag structure; give e.g. --lags 0,1,0-1,dl0-5.")
    if "" in labels:
        raise SpecificationError(f"--lags {text!r} has an empty item; separate lag structures by single commas.")
    lags = [with_min_count(label, min_count) for label in labels]
    check_min_count(lags, min_count)
    return lags


def parse_df_list(text: str) -> list[float]:
    """``--trend-df-per-year 7`` or ``4,6,8`` → numbers > 0 (whole numbers as ``int``, for display)."""
    values: list[float] = []
    for item in (t.strip() for t in str(text).split(",")):
        try:
            value = float(item)
        except ValueError:
            value = math.nan
        if not math.isfinite(value) or value <= 0:
            raise SpecificationError(
                f"--trend-df-per-year {text!r}: {item!r} is not a number of df per year > 0; "
                "give e.g. 7 or 4,6,8,10,12."
            )
        values.append(int(value) if value.is_integer() else value)
    return values


def _compare(args: argparse.Namespace, level: float) -> pd.DataFrame:
    from ..studies.compare import compare

    lags = parse_lag_list(args.lags, args.min_count)
    dfs = parse_df_list(args.trend_df_per_year)
    units = parse_units(args.unit, [args.exposure])
    data = read_daily(args, [args.outcome, args.exposure, args.temperature, args.humidity])
    options = {k: v for k, v in model_options(args).items() if k not in ("trend_df_per_year", "interval")}
    return compare(
        data, lags, trend_df_per_year=dfs, per=args.per, level=level, common_days=not args.all_days,
        interval=args.interval, outcome=args.outcome, exposure=args.exposure, units=units, **options,
    )  # fmt: skip


def run(args: argparse.Namespace) -> int:
    """Compare and print (a table, or JSON with ``--json``); returns the exit code.

    Warnings are printed to stderr, also when the comparison then fails.
    """
    level = confidence_level(args.confidence)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            table = _compare(args, level)
        finally:
            for message in dict.fromkeys(str(w.message) for w in caught):
                print(f"warning: {with_command_line_remedy(message)}", file=sys.stderr)
    table = table.assign(level=level)
    if args.out is not None:
        write_with(args.out, lambda tmp: table.to_csv(tmp, index=False, date_format="%Y-%m-%d"), make_parents=False)
    if args.json:
        print(json.dumps(records(table), indent=2, ensure_ascii=False))
    else:
        print(format_table(table, level))
    return 0


def records(table: pd.DataFrame) -> list[dict[str, Any]]:
    """The JSON objects: one per model, keys in :data:`JSON_KEYS` order, NaN as null, dates as ISO text."""
    keys = [k for k in (*JSON_KEYS, "hac_lags") if k in table.columns]
    out = []
    for row in table[keys].to_dict(orient="records"):
        out.append({k: json_safe(v) for k, v in row.items()})
    return out


def format_table(table: pd.DataFrame, level: float) -> str:
    """The table printed by default: one line per model, then which days and which common dispersion."""
    first = table.iloc[0]
    ci = f"{100 * level:g}% CI"
    shown = pd.DataFrame({
        "lag": table["lag"],
        "df/year": table["trend_df_per_year"].map(lambda v: f"{v:g}"),
        f"RR per {first['per']:g} {_printable(first['unit'])}": table["rr"].map(lambda v: f"{v:.4f}"),
        ci: [f"{lo:.4f}-{hi:.4f}" for lo, hi in zip(table["rr_low"], table["rr_high"], strict=True)],
        "p": table["p_value"].map(lambda v: f"{v:.3g}"),
        "QAIC": table["qaic"].map(lambda v: f"{v:.1f}"),
        "QAIC common": table["qaic_common"].map(lambda v: f"{v:.1f}"),
        "delta": table["delta_qaic_common"].map(lambda v: f"{v:.1f}"),
        "days": table["n_days"],
    })  # fmt: skip
    lines = [f"{_printable(first['outcome'])} vs {_printable(first['exposure'])}", shown.to_string(index=False)]
    span = f"{first['first_day']:%Y-%m-%d} to {first['last_day']:%Y-%m-%d}"
    if first["days"] == "common":
        lines.append(f"days: the {first['n_days']} days usable by every model ({span})")
    else:
        lines.append("days: each model's own usable days (--all-days); QAIC values are not comparable across rows")
    if first["common_dispersion"] != 1.0 or first["qaic_common_from"].startswith("lag"):
        lines.append(
            f"QAIC common: dispersion {first['common_dispersion']:.4f} of the largest model, "
            f"{first['qaic_common_from']}; delta = QAIC common minus the smallest"
        )
    if "hac_lags" in table.columns:
        lags = ", ".join(str(v) for v in dict.fromkeys(table["hac_lags"]))
        lines.append(f"intervals: Newey-West (HAC), truncation lag {lags} days")
    lines.append("relative risks are associations estimated from daily time series, not proof of causation")
    return "\n".join(lines)


def _printable(text: str) -> str:
    """User text for the terminal: control characters (escape sequences, new lines) shown as ``?``."""
    return "".join(c if c.isprintable() else "?" for c in str(text))
