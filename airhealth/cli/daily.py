"""``airhealth daily``: hourly readings (CSV) → one daily exposure series (CSV).

Usage::

    airhealth daily HOURLY.csv --time COL --value COL [--monitor COL] --statistic mean|max1h|max8h
        [--convention eu|us] [--unit-in ppb --unit-out ugm3 --pollutant no2] --out DAILY.csv

The output has the columns ``date``, the value, and the count the day rests on (``n_hours`` for ``mean`` and
``max1h``, ``n_8h_means`` for ``max8h``). With ``--monitor`` the monitors are combined into one city series
(centred-deviation method by default) and the count columns become ``n_hours`` = valid hours summed over the
monitors with a valid value that day (e.g. 46 for two monitors with 23 and 23), ``n_monitors`` = those
monitors, and ``n_hours_per_monitor`` = their mean (``n_hours / n_monitors``; empty when no monitor has a
value); monitors flagged by :func:`~airhealth.prep.monitors.monitor_agreement` are reported as warnings.
``--per-monitor`` writes one row per monitor and day instead. Row numbers in error messages are CSV line
numbers. The directory of ``--out`` must exist.
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

import pandas as pd

from .._io import write_with
from .._warn import warn_user
from ..errors import DataError, DataWarning, SpecificationError
from ..prep.hourly import aggregate_daily, count_column, validity_rule
from ..prep.hourly_input import clean_hourly
from ..prep.monitors import combine_monitors, monitor_agreement, screen_monitor_years
from ..prep.units import convert_units, parse_unit, single_unit
from .tables import read_table

__all__ = ["register", "run"]


def register(subparsers: argparse._SubParsersAction) -> None:
    """Add the ``daily`` sub-command."""
    p = subparsers.add_parser(
        "daily",
        help="hourly monitoring data -> daily exposure series",
        description="Daily mean, maximum 1-hour or maximum 8-hour values from hourly readings, with the EU "
        "(Directive 2008/50/EC) or US (40 CFR Part 50) completeness rules; see docs/hourly-to-daily.md.",
    )
    p.add_argument("hourly", metavar="HOURLY.csv", help="hourly readings, one row per monitor and hour")
    p.add_argument("--time", required=True, metavar="COL", help="timestamp column")
    p.add_argument("--value", required=True, metavar="COL", help="concentration column")
    p.add_argument(
        "--monitor",
        metavar="COL",
        help="monitor column; several monitors are combined into one city series with the extra columns "
        "n_monitors (monitors with a valid value that day) and n_hours_per_monitor (their mean valid hours); "
        "n_hours is then summed over those monitors (n_8h_means and n_8h_means_per_monitor for max8h)",
    )
    p.add_argument("--statistic", required=True, choices=["mean", "max1h", "max8h"])
    p.add_argument("--convention", default="eu", choices=["eu", "us"], help="completeness rules (default eu)")
    p.add_argument("--out", required=True, metavar="DAILY.csv", help="output CSV (its directory must exist)")
    units = p.add_argument_group("units")
    units.add_argument("--unit-in", metavar="UNIT", help="unit of the values: ppb, ppm, ugm3, mgm3")
    units.add_argument("--unit-column", metavar="COL", help="column stating the unit (must hold one unit)")
    units.add_argument("--unit-out", metavar="UNIT", help="unit to convert to (needs --pollutant)")
    units.add_argument("--pollutant", choices=["o3", "no2", "so2", "co"], help="for ppb <-> µg/m³")
    units.add_argument("--temperature", type=float, default=25.0, help="°C of µg/m³ (default 25; EU uses 20)")
    times = p.add_argument_group("time")
    times.add_argument("--hour-label", default="start", choices=["start", "end"], help="default start")
    times.add_argument("--timezone", metavar="ZONE", help="IANA zone of the monitors, e.g. Europe/Oslo")
    times.add_argument("--times-in", default="standard", choices=["standard", "wall", "utc"])
    times.add_argument("--day-clock", default="standard", choices=["standard", "wall"])
    times.add_argument("--time-format", metavar="FMT", help="strftime format if not ISO 8601")
    rules = p.add_argument_group("rules and input checks")
    rules.add_argument("--exceedance-level", type=float, help="US: level for 'valid if above' (output unit)")
    rules.add_argument("--negative", default="keep", choices=["keep", "drop", "error"])
    rules.add_argument("--duplicates", default="error", choices=["error", "mean", "first"])
    rules.add_argument("--na-values", metavar="LIST", help="comma-separated codes meaning missing, e.g. -999")
    combine = p.add_argument_group("several monitors")
    combine.add_argument("--combine", default="centred", choices=["centred", "mean"])
    combine.add_argument("--min-monitors", type=int, default=1)
    combine.add_argument("--min-year-fraction", type=float, help="drop monitor-years with fewer valid days")
    combine.add_argument("--per-monitor", action="store_true", help="write one row per monitor and day")
    p.add_argument("--name", help="name of the value column (default: --value, or POLLUTANT_UNIT)")
    p.set_defaults(func=run)


def _read(args: argparse.Namespace) -> pd.DataFrame:
    na = [v.strip() for v in args.na_values.split(",")] if args.na_values else None
    frame = read_table(Path(args.hourly), na_values=na)
    frame.index = frame.index + 2  # CSV line numbers (line 1 is the header)
    return frame


def _units(frame: pd.DataFrame, args: argparse.Namespace) -> tuple[str | None, str | None]:
    """Input and output unit codes from the options (and the unit column, which must hold one unit)."""
    unit_in = parse_unit(args.unit_in) if args.unit_in else None
    if args.unit_column:
        stated = single_unit(frame, args.unit_column)
        if unit_in and unit_in != stated:
            raise DataError(f"--unit-in {unit_in} disagrees with column {args.unit_column!r} ({stated}).")
        unit_in = stated
    if not args.unit_out:
        return unit_in, None
    if not unit_in or not args.pollutant:
        raise SpecificationError("--unit-out needs --unit-in (or --unit-column) and --pollutant.")
    return unit_in, parse_unit(args.unit_out)


def _combine(daily: pd.DataFrame, name: str, count: str, args: argparse.Namespace) -> pd.DataFrame:
    """City series with ``n_monitors``, the summed count and the mean count per monitor used."""
    if args.min_year_fraction is not None:
        daily, _ = screen_monitor_years(daily, value=name, min_fraction=args.min_year_fraction)
    _warn_disagreement(daily, name)
    city = combine_monitors(daily, value=name, method=args.combine, min_monitors=args.min_monitors)
    used = daily[daily[name].notna()].groupby("date")[count].sum()
    city[count] = city["date"].map(used).fillna(0).astype(int)
    per_monitor = city[count] / city["n_monitors"].where(city["n_monitors"] > 0)
    city[f"{count}_per_monitor"] = per_monitor.round(2)
    return city[["date", name, count, "n_monitors", f"{count}_per_monitor"]]


def _warn_disagreement(daily: pd.DataFrame, name: str) -> None:
    """Warn about monitors that the agreement check flags (see :func:`monitor_agreement`)."""
    if daily["monitor"].nunique() < 2:
        return
    table = monitor_agreement(daily, value=name)
    for row in table[table["flagged"]].itertuples():
        warn_user(f"monitor {row.monitor!r} disagrees with the others: {row.reason}.", DataWarning)


def _daily(args: argparse.Namespace) -> tuple[pd.DataFrame, pd.DataFrame, str]:
    """Read, clean, convert and aggregate; returns the output table, the per-monitor table and the name."""
    frame = _read(args)
    unit_in, unit_out = _units(frame, args)
    clean = clean_hourly(
        frame,
        time=args.time,
        value=args.value,
        monitor=args.monitor,
        hour_label=args.hour_label,
        timezone=args.timezone,
        times_in=args.times_in,
        time_format=args.time_format,
        negative=args.negative,
        duplicates=args.duplicates,
    )
    name = args.name or args.value
    if unit_out:
        factor_args = {"temperature_c": args.temperature}
        clean = clean.assign(value=convert_units(clean["value"], args.pollutant, unit_in, unit_out, **factor_args))
        name = args.name or f"{args.pollutant}_{unit_out}"
    daily = aggregate_daily(
        clean,
        statistic=args.statistic,
        convention=args.convention,
        day_clock=args.day_clock,
        timezone=args.timezone,
        exceedance_level=args.exceedance_level,
        name=name,
    )
    count = count_column(args.statistic)
    if args.per_monitor:
        return daily[["monitor", "date", name, count]], daily, name
    if args.monitor:
        return _combine(daily, name, count, args), daily, name
    return daily[["date", name, count]], daily, name


def run(args: argparse.Namespace) -> int:
    """Run the command; returns the exit code.

    Warnings are printed to stderr even when a later step fails, so one that explains the error is not lost.
    """
    parent = Path(args.out).parent
    if not parent.is_dir():  # checked before the work; write_with checks again when writing
        raise DataError(f"cannot write {args.out!r}: directory {str(parent)!r} does not exist; create it first.")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            out, daily, name = _daily(args)
            write_with(args.out, lambda tmp: out.to_csv(tmp, index=False, date_format="%Y-%m-%d"), make_parents=False)
        finally:
            for warning in caught:
                print(f"airhealth daily: warning: {warning.message}", file=sys.stderr)
    rule = validity_rule(args.statistic, args.convention, exceedance_level=args.exceedance_level)
    print(
        f"wrote {args.out}: {len(out)} days, {int(out[name].notna().sum())} with a value "
        f"({daily['monitor'].nunique()} monitor(s); rule: {rule.source})."
    )
    return 0
