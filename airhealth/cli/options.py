"""Options shared by the commands that read one daily table and fit models (``fit``, ``report``).

Each option is declared once here, with its help text, and turned into the arguments of the layers below
(:func:`read_daily` for the file, :func:`model_options` for :class:`~airhealth.model.spec.ModelSpec`), so
the commands cannot drift apart.
"""

from __future__ import annotations

import argparse
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import pandas as pd

from ..errors import SpecificationError
from ..model.bases.lag_structures import LagStructure, MovingAverage, parse_lag
from ..prep.align import merge_duplicate_days, restrict_months, restrict_period
from ..prep.validate import parse_dates, require_columns
from .tables import check_numeric_columns, read_table

__all__ = [
    "DAILY_FILE_HELP",
    "add_copollutant_options",
    "add_label_option",
    "add_lag_option",
    "add_layout_options",
    "add_model_options",
    "add_outcome_exposure",
    "add_reading_options",
    "confidence_level",
    "copollutant_options",
    "model_options",
    "parse_labels",
    "parse_na_values",
    "parse_units",
    "read_daily",
    "single_lag",
    "with_min_count",
]

#: Help of the positional daily file of the commands that read one daily table.
DAILY_FILE_HELP = "CSV file with one row per day (- for standard input)"


def add_outcome_exposure(p: argparse.ArgumentParser, required: bool = True) -> None:
    """``--outcome COL`` and ``--exposure COL``: what every fitting command models."""
    p.add_argument("--outcome", required=required, help="column of daily counts")
    p.add_argument("--exposure", required=required, help="column of the daily pollutant level")


def add_lag_option(p: argparse.ArgumentParser) -> None:
    """``--lag``: the one lag structure of a fit (read by :func:`single_lag`)."""
    p.add_argument("--lag", default="0-1", help='lag: "0", "2", "0-1", "dl0-5", "dl0-7:poly3", ... (default "0-1")')


def add_layout_options(g: Any) -> None:
    """How a CSV file is laid out (separator, decimal mark, encoding, date format, repeated dates): the
    options every command that reads daily tables shares (``fit``, ``report``, ``align``)."""
    g.add_argument("--sep", default=",", help='field separator (default ","; e.g. ";" or tab)')
    g.add_argument("--decimal", default=".", help='decimal mark (default "."; e.g. ",")')
    g.add_argument("--encoding", default="utf-8", help="text encoding of the file (default utf-8; e.g. latin-1)")
    g.add_argument(
        "--date-format",
        metavar="FMT",
        help="format of the dates if not ISO 2015-03-31, e.g. %%d/%%m/%%Y; 'excel' for spreadsheet serial numbers",
    )
    g.add_argument(
        "--duplicates",
        default="error",
        choices=["error", "mean", "first"],
        help="dates given on several rows: error (default), average the rows, or keep the first",
    )


def add_reading_options(p: argparse.ArgumentParser) -> None:
    """Options on how to read the daily CSV file: layout, dates, missing values, period."""
    g = p.add_argument_group("reading the file")
    g.add_argument("--date", default="date", metavar="COL", help='date column (default "date")')
    add_layout_options(g)
    g.add_argument(
        "--na-values",
        nargs="+",
        metavar="CODE",
        help="values meaning missing, e.g. --na-values -999 '<LOD' (or --na-values=-999,<LOD), besides empty cells "
        "and NA; in outcome columns a code that could be a count (0, 9999) applies only far outside the counts",
    )
    g.add_argument(
        "--start",
        metavar="DATE",
        help="restrict the period: first day to use (ISO, e.g. 2012-01-01, or as --date-format)",
    )
    g.add_argument(
        "--end", metavar="DATE", help="restrict the period: last day to use (ISO, e.g. 2019-12-31, or as --date-format)"
    )
    g.add_argument(
        "--months",
        metavar="LIST",
        help="keep only these calendar months of each year, e.g. 4-9 or 5,6,7,8 (a season-restricted analysis)",
    )


def add_model_options(p: argparse.ArgumentParser) -> None:
    """Options of the model and of its reported effects (the exposure, outcome and lag are per command)."""
    g = p.add_argument_group("model")
    g.add_argument("--temperature", default=None, metavar="COL", help="column of daily mean temperature (default none)")
    g.add_argument("--humidity", default=None, metavar="COL", help="column of relative humidity (spline, 3 df)")
    g.add_argument("--trend-df-per-year", type=float, default=7.0, help="df per year of the time spline (default 7)")
    g.add_argument("--temperature-df", type=int, default=6, help="df of the same-day temperature spline (default 6)")
    g.add_argument(
        "--temperature-lag-df", type=int, default=6, help="df of the spline of mean temperature, lags 1-3 (default 6)"
    )
    g.add_argument("--holidays", default=None, metavar="COUNTRY", help="ISO country code for a holiday indicator")
    g.add_argument("--family", default="quasipoisson", help="quasipoisson (default), poisson or negbin")
    g.add_argument("--theta-method", default="ml", help="negative binomial theta: ml (default) or moments")
    g.add_argument("--seasonality", default="spline", help="spline (default) or fourier")
    g.add_argument(
        "--min-count",
        type=int,
        metavar="N",
        help="moving-average lags use the mean of the available days when at least N are present "
        "(default: every day of the window is needed)",
    )
    g.add_argument(
        "--interval",
        default="quasi-poisson",
        help="standard errors and intervals: quasi-poisson (default, model-based) or hac (Newey-West, robust to "
        "residual autocorrelation)",
    )
    g.add_argument(
        "--hac-lags",
        type=int,
        default=None,
        metavar="L",
        help="truncation lag of --interval hac (default floor(4 (days/100)^(2/9)), about 9 for 14 years)",
    )
    g.add_argument(
        "--residual-lags",
        type=int,
        default=0,
        metavar="K",
        help="add the deviance residuals of a first fit at lags 1..K as covariates, for remaining residual "
        "autocorrelation (Brumback et al. 2000; default 0, none)",
    )
    e = p.add_argument_group("effects")
    e.add_argument("--per", type=float, default=10.0, help="exposure increase for the relative risk (default 10)")
    e.add_argument(
        "--confidence", default="0.95", metavar="LEVEL", help="confidence level (default 0.95; or 90 for 90%%)"
    )
    e.add_argument(
        "--unit",
        action="append",
        default=[],
        metavar="COL=UNIT",
        help="unit of an exposure, e.g. o3=ppb (repeat for several; default µg/m³)",
    )


def add_copollutant_options(p: argparse.ArgumentParser) -> None:
    """Co-pollutants and an effect modifier (``fit``): ``--copollutant COL`` (repeatable), ``--modifier COL``."""
    g = p.add_argument_group("co-pollutants and effect modification")
    g.add_argument(
        "--copollutant",
        action="append",
        default=[],
        metavar="COL",
        help="adjust for another pollutant at the exposure's lag (repeat for several; its unit via --unit COL=UNIT)",
    )
    g.add_argument(
        "--modifier",
        default=None,
        metavar="COL",
        help="categorical column (e.g. season, age group): one exposure effect per level and a test of equal effects",
    )


def copollutant_options(args: argparse.Namespace) -> dict[str, Any]:
    """The :class:`~airhealth.model.spec.ModelSpec` options of :func:`add_copollutant_options`."""
    return {"copollutants": tuple(args.copollutant), "modifier": args.modifier}


def add_design_options(p: argparse.ArgumentParser) -> None:
    """The study design of ``fit``: time series (default) or time-stratified case-crossover."""
    g = p.add_argument_group("design")
    g.add_argument(
        "--design",
        default="time-series",
        help="time-series (default) or case-crossover (time-stratified: strata of year x month x day of week "
        "replace the time spline and day of week)",
    )
    g.add_argument(
        "--overdispersion",
        default="on",
        choices=("on", "off"),
        help="correct the standard errors for over-dispersion: on (default, quasi-Poisson) or off (Poisson)",
    )


def design_options(args: argparse.Namespace) -> dict[str, Any]:
    """The :class:`~airhealth.model.spec.ModelSpec` options of :func:`add_design_options`."""
    return {"design": args.design, "overdispersion": args.overdispersion == "on"}


def parse_na_values(given: str | Sequence[str] | None) -> tuple[list[str], tuple[Any, ...]]:
    """``--na-values`` (codes separated by spaces or commas) → (texts for the CSV reader, values: numbers as
    floats, other codes as text)."""
    if not given:
        return [], ()
    items = [given] if isinstance(given, str) else list(given)
    texts = [t.strip() for item in items for t in item.split(",") if t.strip()]
    if not texts:
        raise SpecificationError(f"--na-values {' '.join(items)!r} names no value; give e.g. --na-values -999 '<LOD'.")
    values: list[Any] = []
    for t in texts:
        try:
            values.append(float(t))
        except ValueError:
            values.append(t)
    return texts, tuple(values)


def parse_units(items: Sequence[str], exposures: Sequence[str]) -> dict[str, str]:
    """``--unit COL=UNIT`` (repeatable; a bare ``UNIT`` when there is one exposure) → ``{column: unit}``."""
    units: dict[str, str] = {}
    for item in items:
        column, sep, unit = item.partition("=")
        if not sep:
            if len(exposures) != 1:
                raise SpecificationError(f"--unit {item!r}: with several exposures write COL=UNIT, e.g. --unit o3=ppb.")
            column, unit = exposures[0], item
        column, unit = column.strip(), unit.strip()
        if not unit:
            raise SpecificationError(f"--unit {item!r} gives no unit; write e.g. --unit o3=ppb.")
        if column not in exposures:
            raise SpecificationError(
                f"--unit {item!r} names {column!r}, which is not an exposure ({', '.join(exposures)})."
            )
        if column in units:
            raise SpecificationError(f"--unit gives the unit of {column!r} twice.")
        units[column] = unit
    return units


def add_label_option(p: argparse.ArgumentParser) -> None:
    """``--label NAME=TEXT`` (repeatable): display names in tables and figures (``report``, ``demo``, ``fit``)."""
    p.add_argument(
        "--label",
        action="append",
        default=[],
        metavar="NAME=TEXT",
        help="display name of a column, outcome or exposure in tables and figures, e.g. --label "
        'deaths_all="All-cause deaths" (repeat for each name)',
    )


def parse_labels(items: Sequence[str]) -> dict[str, str]:
    """``--label NAME=TEXT`` (repeatable) → ``{name: text}``; quotes around the text are removed."""
    labels: dict[str, str] = {}
    for item in items:
        name, sep, text = item.partition("=")
        name, text = name.strip(), text.strip()
        if len(text) >= 2 and text[0] == text[-1] and text[0] in "'\"":
            text = text[1:-1].strip()
        if not sep or not name or not text:
            raise SpecificationError(f'--label {item!r}: write NAME=TEXT, e.g. --label deaths_all="All-cause deaths".')
        if name in labels:
            raise SpecificationError(f"--label gives the display name of {name!r} twice.")
        labels[name] = text
    return labels


def confidence_level(text: str) -> float:
    """``--confidence`` as a level in (0, 1): ``0.9``, or ``90`` read as per cent (from 50 to under 100)."""
    try:
        value = float(text)
    except ValueError:
        value = float("nan")
    if 50 <= value < 100:  # a percentage
        value /= 100
    if not 0 < value < 1:
        raise SpecificationError(f"--confidence {text!r} is not a confidence level; use e.g. 0.95 (or 95).")
    return value


def with_min_count(lag: Any, min_count: int | None) -> LagStructure:
    """The lag structure, with ``min_count`` for a moving average (``--min-count``)."""
    parsed = parse_lag(lag)
    if min_count is None or not isinstance(parsed, MovingAverage):
        return parsed
    return MovingAverage(parsed.first, parsed.last, min_count=min_count)


def check_min_count(lags: Sequence[LagStructure], min_count: int | None) -> None:
    """``--min-count`` needs a moving-average lag to apply to."""
    if min_count is not None and not any(isinstance(lag, MovingAverage) for lag in lags):
        shown = ", ".join(lag.label for lag in lags)
        raise SpecificationError(
            f"--min-count applies to moving-average lags such as 0-3, and none is given (lags: {shown})."
        )


def single_lag(args: argparse.Namespace) -> LagStructure:
    """The lag structure of ``--lag`` with ``--min-count`` applied (and checked to apply)."""
    lag = with_min_count(args.lag, args.min_count)
    check_min_count([lag], args.min_count)
    return lag


def read_daily(
    args: argparse.Namespace,
    columns: Sequence[str | None],
    per_analysis: Sequence[str] = (),
) -> pd.DataFrame:
    """Read the daily file: columns present, dates read, numbers numeric, duplicates merged, period restricted.

    Text in a ``per_analysis`` column (the exposures of a report) is left for each analysis's own checks, so
    one badly coded exposure fails its analyses (listed in the report) instead of the whole report.

    Text ``--na-values`` codes (``<LOD``) are read as missing in ``columns`` here, so that those columns read
    as numbers; numeric codes are left to the model's preparation layer (:func:`model_options` passes every
    code on), which alone decides where a code that could be a count applies. The date column of the returned frame
    holds dates (``--date-format`` applied), so the model reads them as given. Errors name the file and the
    option that fixes them.
    """
    path = Path(args.data)
    sep = "\t" if args.sep in ("tab", "\\t") else args.sep
    texts, values = parse_na_values(args.na_values)
    wanted = [c for c in columns if c is not None]
    text_codes = [t for t, v in zip(texts, values, strict=True) if isinstance(v, str)]
    codes = {c: text_codes for c in wanted} if text_codes else None
    frame = read_table(path, sep=sep, decimal=args.decimal, na_values=codes, encoding=args.encoding)
    what = path.name
    require_columns(frame, [args.date, *wanted], what)
    dates = parse_dates(frame, args.date, what, date_format=args.date_format)
    check_numeric_columns(frame, [c for c in wanted if c != args.date and c not in per_analysis], what, dates)
    frame = frame.assign(**{args.date: dates})
    frame = merge_duplicate_days(frame, args.duplicates, args.date, what)
    if args.start or args.end:
        frame = restrict_period(frame, args.start, args.end, args.date, what, date_format=args.date_format)
    if args.months:
        frame = restrict_months(frame, parse_months(args.months), args.date, what)
    return frame


def parse_months(text: str) -> list[int]:
    """``--months 4-9`` or ``--months 5,6,7`` → calendar month numbers."""
    months: list[int] = []
    for part in (p.strip() for p in text.split(",") if p.strip()):
        first, sep, last = part.partition("-")
        try:
            lo, hi = int(first), int(last) if sep else int(first)
        except ValueError:
            lo, hi = 0, 0
        if not (1 <= lo <= hi <= 12):
            raise SpecificationError(f"--months {text!r}: use month numbers 1-12, e.g. --months 4-9 or 5,6,7.")
        months += range(lo, hi + 1)
    if not months:
        raise SpecificationError(f"--months {text!r} names no month; use e.g. --months 4-9.")
    return sorted(set(months))


def model_options(args: argparse.Namespace) -> dict[str, Any]:
    """The :class:`~airhealth.model.spec.ModelSpec` options of the shared command-line options."""
    _, codes = parse_na_values(args.na_values)
    na_values = tuple(codes)  # the preparation layer decides which codes apply to count columns
    return {
        "date": args.date,
        "temperature": args.temperature,
        "humidity": args.humidity,
        "trend_df_per_year": args.trend_df_per_year,
        "temperature_df": args.temperature_df,
        "temperature_lag_df": args.temperature_lag_df,
        "theta_method": args.theta_method,
        "holidays": args.holidays,
        "family": args.family,
        "seasonality": args.seasonality,
        "na_values": na_values,
        "interval": args.interval,
        "hac_lags": args.hac_lags,
        "residual_lags": args.residual_lags,
    }
