"""``airhealth sensitivity DATA.csv --outcome COL --exposure COL ...``: the estimate under alternative settings.

Runs :func:`airhealth.sensitivity` with the default checks of the main model
(:func:`airhealth.studies.sensitivity.default_checks`), the time df per year of ``--time-df``, the
percentile of ``--exclude-above-percentile`` and the periods of ``--exclude-period``; prints the table (or
JSON records) and writes it (``--out``, CSV) and its figure (``--figure``, PNG), each file atomically.
"""

from __future__ import annotations

import argparse
import json
import sys
import warnings
from pathlib import Path
from typing import Any

import pandas as pd

from .._io import write_with
from ..errors import SpecificationError
from .json_output import json_safe
from .options import (
    add_model_options,
    add_reading_options,
    check_min_count,
    confidence_level,
    model_options,
    parse_units,
    read_daily,
    with_min_count,
)
from .remedies import with_command_line_remedy

SHOWN = ["check", "setting", "is_main", "rr", "rr_low", "rr_high", "p_value", "qaic", "n_days", "n_excluded"]


def register(sub: Any) -> None:
    """Add the ``sensitivity`` sub-command."""
    p = sub.add_parser(
        "sensitivity",
        help="refit the model under alternative settings (time df, temperature, exclusions)",
        description="Refit one model with one setting changed at a time and report the relative risk under each.",
    )
    p.add_argument("data", type=Path, help="CSV file with one row per day (- for standard input)")
    p.add_argument("--outcome", required=True, help="column of daily counts")
    p.add_argument("--exposure", required=True, help="column of the daily pollutant level")
    p.add_argument("--lag", default="0-1", help='lag of the main model (default "0-1")')
    s = p.add_argument_group("settings")
    s.add_argument(
        "--time-df", default="4,6,8,10,12", metavar="LIST", help="df per year of the time spline to try (default "
        "4,6,8,10,12)"
    )  # fmt: skip
    s.add_argument(
        "--exclude-above-percentile",
        default="99",
        metavar="P",
        help="leave out the days whose exposure is above this percentile (default 99; 'none' for no such row)",
    )
    s.add_argument(
        "--exclude-period",
        action="append",
        default=[],
        metavar="NAME=START:END",
        help="leave out a named period, e.g. epidemic=2012-01-10:2012-02-20 (ISO dates; repeat for several)",
    )
    o = p.add_argument_group("output")
    o.add_argument("--json", action="store_true", help="print the table as JSON records")
    o.add_argument("--out", type=Path, metavar="FILE.csv", help="write the table as CSV")
    o.add_argument("--figure", type=Path, metavar="FILE.png", help="write the figure as PNG")
    add_model_options(p)
    add_reading_options(p)
    p.set_defaults(func=run)


def parse_time_df(text: str) -> list[float]:
    """``--time-df 4,6,8`` → ``[4.0, 6.0, 8.0]``."""
    parts = [t.strip() for t in text.split(",") if t.strip()]
    try:
        values = [float(t) for t in parts]
    except ValueError:
        values = []
    if not values:
        raise SpecificationError(f"--time-df {text!r}: give df per year separated by commas, e.g. --time-df 4,6,8.")
    return values


def parse_periods(items: list[str]) -> dict[str, tuple[str, str]]:
    """``--exclude-period NAME=START:END`` (repeatable) → ``{name: (start, end)}``."""
    periods: dict[str, tuple[str, str]] = {}
    for item in items:
        name, _, bounds = item.partition("=")
        start, sep, end = bounds.partition(":")
        if not (name.strip() and sep and start.strip() and end.strip()):
            raise SpecificationError(
                f"--exclude-period {item!r}: write NAME=START:END with ISO dates, e.g. epidemic=2012-01-10:2012-02-20."
            )
        if name.strip() in periods:
            raise SpecificationError(f"--exclude-period names the period {name.strip()!r} twice.")
        periods[name.strip()] = (start.strip(), end.strip())
    return periods


def _checks(args: argparse.Namespace, options: dict[str, Any]) -> dict[str, Any]:
    from ..model.spec import ModelSpec
    from ..studies.sensitivity import EXCLUDE_ABOVE, EXCLUDE_PERIODS, default_checks

    checks = default_checks(ModelSpec.from_options(**options))
    if "trend_df_per_year" in checks:
        checks["trend_df_per_year"] = parse_time_df(args.time_df)
    if args.exclude_above_percentile.strip().lower() == "none":
        checks.pop(EXCLUDE_ABOVE)
    else:
        try:
            percentile = float(args.exclude_above_percentile)
        except ValueError:
            percentile = float("nan")
        if not 0 < percentile < 100:
            raise SpecificationError(
                f"--exclude-above-percentile {args.exclude_above_percentile!r}: give a percentile strictly between "
                "0 and 100 (e.g. 99), or 'none'."
            )
        checks[EXCLUDE_ABOVE] = percentile
    if args.exclude_period:
        checks[EXCLUDE_PERIODS] = parse_periods(args.exclude_period)
    return checks


def _table(args: argparse.Namespace, level: float) -> pd.DataFrame:
    from ..studies.sensitivity import sensitivity

    lag = with_min_count(args.lag, args.min_count)
    check_min_count([lag], args.min_count)
    units = parse_units(args.unit, [args.exposure])
    options = {"outcome": args.outcome, "exposure": args.exposure, "lag": lag, "units": units, **model_options(args)}
    checks = _checks(args, options)
    data = read_daily(args, [args.outcome, args.exposure, args.temperature, args.humidity])
    return sensitivity(data, checks=checks, per=args.per, level=level, **options)


def run(args: argparse.Namespace) -> int:
    """Run the sensitivity analyses, print and write them; returns the exit code."""
    level = confidence_level(args.confidence)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            table = _table(args, level)
        finally:
            for w in caught:
                print(f"warning: {with_command_line_remedy(str(w.message))}", file=sys.stderr)
    if args.out is not None:
        write_with(args.out, lambda tmp: table.to_csv(tmp, index=False), make_parents=False)
    if args.figure is not None:
        from ..report.sensitivity_plots import plot_sensitivity

        figure = plot_sensitivity(table, level=level).figure
        write_with(args.figure, lambda tmp: figure.savefig(tmp, format="png", dpi=150), make_parents=False)
    if args.json:
        print(json.dumps(json_safe(table.to_dict(orient="records")), indent=2, ensure_ascii=False))
    else:
        print(table[SHOWN].to_string(index=False, float_format=lambda v: f"{v:.4f}"))
        print("Relative risks are associations, not proof of causation.")
    return 0
