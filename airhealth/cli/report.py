"""``airhealth report DATA.csv --outcome COL --exposure COL --lags 0,1,0-1,dl0-5 --out DIR``: the HTML report.

Fits every outcome × exposure × lag structure asked for and writes ``DIR/index.html`` with CSV tables and
PNG figures (:func:`airhealth.write_report`). An outcome or exposure whose data fail is listed in the report
with its error (and on stderr) while the rest completes.
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path
from typing import Any

import pandas as pd

from ..errors import SpecificationError
from .options import (
    add_label_option,
    add_model_options,
    add_reading_options,
    check_min_count,
    confidence_level,
    model_options,
    parse_labels,
    parse_units,
    read_daily,
    with_min_count,
)
from .remedies import with_command_line_remedy

__all__ = [
    "CLI_NAMES",
    "add_analysis_options",
    "add_report_options",
    "analysis_options",
    "register",
    "run",
    "write_and_print",
]

#: The command-line option of each analysis keyword of ``write_report`` (for messages).
CLI_NAMES = {
    "diagnostics": "--diagnostics", "robustness": "--robustness", "sensitivity": "--sensitivity",
    "copollutant_check": "--copollutant",
    "effect_modifier": "--modifier", "burden": "--burden", "compare_designs": "--compare-designs",
}  # fmt: skip


class _InOrder(argparse.Action):
    """Store an analysis option and remember the order in which the analyses were asked for."""

    def __call__(self, parser: Any, namespace: argparse.Namespace, values: Any, option_string: Any = None) -> None:
        order = list(getattr(namespace, "analysis_order", None) or [])
        if self.dest not in order:
            order.append(self.dest)
        namespace.analysis_order = order
        if self.nargs == 0:
            setattr(namespace, self.dest, True)
        elif self.dest == "copollutant_check":
            setattr(namespace, self.dest, [*(getattr(namespace, self.dest, None) or []), values])
        else:
            setattr(namespace, self.dest, values)


def add_analysis_options(p: argparse.ArgumentParser) -> None:
    """Further analyses of the main model, each a report section in the order given on the command line."""
    g = p.add_argument_group("further analyses of the main model (sections in the order given)")
    g.add_argument("--diagnostics", action=_InOrder, nargs=0, help="residual autocorrelation, influential days")
    g.add_argument(
        "--robustness",
        action=_InOrder,
        nargs=0,
        help="every --lags structure x df per year of the time trend (own -3, own, +3), common days, QAIC",
    )
    g.add_argument(
        "--sensitivity",
        action=_InOrder,
        nargs=0,
        help="the main model refitted with one setting changed at a time (time df, temperature, extreme days)",
    )
    g.add_argument(
        "--copollutant",
        dest="copollutant_check",
        action=_InOrder,
        metavar="COL",
        help="table of the main estimate alone and adjusted for this pollutant (repeat for several)",
    )
    g.add_argument(
        "--modifier",
        dest="effect_modifier",
        action=_InOrder,
        metavar="COL",
        help="categorical column (e.g. season): the effect in each level and a test of equal effects",
    )
    g.add_argument(
        "--burden",
        action=_InOrder,
        metavar="PRESET_OR_VALUE",
        help="cases attributable above a counterfactual: a level in the exposure's unit or a preset such as "
        "who-guideline:pm2.5:24h (list: airhealth burden --list-counterfactuals)",
    )
    g.add_argument(
        "--compare-designs",
        action=_InOrder,
        nargs=0,
        help="the main model as a time series and as a time-stratified case-crossover",
    )
    p.set_defaults(analysis_order=None)  # fmt: skip


def _burden_value(text: str) -> float | str:
    try:
        return float(text)
    except ValueError:
        return text


def analysis_options(args: argparse.Namespace) -> dict[str, Any]:
    """The analysis keywords of ``write_report`` from the command line, in the order given."""
    options = {name: getattr(args, name, None) for name in (getattr(args, "analysis_order", None) or [])}
    if "burden" in options:
        options["burden"] = _burden_value(options["burden"])
    return options


def check_analysis_options(data: pd.DataFrame, options: dict[str, Any]) -> None:
    """Refuse a bad analysis option before any fitting, naming the command-line option and its value."""
    from ..report.analysis_sections import check_analyses, split_analyses

    check_analyses(split_analyses(options)[0], data, names=CLI_NAMES)


def add_report_options(p: argparse.ArgumentParser) -> None:
    """Options of the written report (shared with ``demo``)."""
    p.add_argument(
        "--out", type=Path, default=Path("airhealth-report"), help="output folder (default ./airhealth-report)"
    )
    p.add_argument(
        "--suppress-below",
        type=int,
        default=None,
        metavar="N",
        help="suppress health counts below N in the report's tables and figures (local disclosure rules)",
    )
    p.add_argument("--title", default=None, help="heading of the report")
    p.add_argument(
        "--table-formats",
        default="csv",
        metavar="LIST",
        help="formats of every table under DIR/tables/, comma-separated from csv,md,html,tex,docx "
        "(default csv; e.g. csv,md,tex,docx); the CSV keeps full precision",
    )
    add_label_option(p)


def register(sub: Any) -> None:
    """Add the ``report`` sub-command."""
    p = sub.add_parser(
        "report",
        help="write an HTML report for your own daily data",
        description="Fit every outcome x exposure x lag structure asked for and write an HTML report with CSV "
        "tables and PNG figures. Analyses that fail on their data are listed in the report; the rest completes.",
    )
    p.add_argument("data", type=Path, help="CSV file with one row per day (- for standard input)")
    p.add_argument("--outcome", action="append", required=True, metavar="COL", help="column of daily counts (repeat)")
    p.add_argument("--exposure", action="append", required=True, metavar="COL", help="pollutant column (repeat)")
    p.add_argument("--lags", default="0-1", help='comma-separated lag structures, e.g. "0,1,0-1,dl0-5" (default "0-1")')
    p.add_argument(
        "--main-lag", default=None, metavar="LAG", help="lag of the main model (default: the first of --lags)"
    )
    add_report_options(p)
    add_analysis_options(p)
    add_model_options(p)
    add_reading_options(p)
    p.set_defaults(func=run)


def split_lags(text: str, min_count: int | None) -> list[Any]:
    """``--lags`` → lag structures, with ``--min-count`` applied to the moving averages."""
    lags = [with_min_count(t.strip(), min_count) for t in text.split(",") if t.strip()]
    if not lags:
        raise SpecificationError(f"--lags {text!r} names no lag structure; give e.g. --lags 0,1,0-1,dl0-5.")
    check_min_count(lags, min_count)
    return lags


def write_and_print(data: pd.DataFrame, args: argparse.Namespace, extra_sections: Any = (), **report: Any) -> int:
    """Build and write the report, print its effects table, failures and where it is; returns the exit code.

    Warnings are printed to stderr (with their command-line remedy) even when a later step fails.
    """
    from ..report.city_report import check_output_folder, report_content, write_content
    from ..report.export import parse_formats
    from ..report.tables import format_effects

    check_output_folder(args.out)
    formats = parse_formats(args.table_formats)
    labels = parse_labels(args.label)

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            content = report_content(
                data, show_progress=True, small_count_threshold=args.suppress_below, labels=labels, **report
            )
            path = write_content(content, args.out, args.title, args.suppress_below, extra_sections, formats, labels)
        finally:
            for w in caught:
                print(f"warning: {with_command_line_remedy(str(w.message))}", file=sys.stderr)
    with pd.option_context("display.width", 160, "display.max_rows", 500, "display.max_colwidth", 60):
        print(format_effects(content.effects, level=report.get("level", 0.95), labels=labels).to_string(index=False))
    for row in content.failures.itertuples():
        message = with_command_line_remedy(row.error)
        print(f"could not fit {row.outcome} and {row.exposure} (lag {row.lag}): {message}", file=sys.stderr)
    print(f"\nreport written to {path}")
    print("Results are statistical associations, not proof of causation.")
    return 0


def run(args: argparse.Namespace) -> int:
    """Read the data, fit and write the report; returns the exit code."""
    if args.suppress_below is not None and args.suppress_below < 1:
        raise SpecificationError(f"--suppress-below must be a whole number >= 1, got {args.suppress_below}.")
    lags = split_lags(args.lags, args.min_count)
    units = parse_units(args.unit, args.exposure)
    level = confidence_level(args.confidence)
    main_lag = None if args.main_lag is None else with_min_count(args.main_lag, args.min_count)
    analyses = analysis_options(args)
    columns = [*args.outcome, *args.exposure, args.temperature, args.humidity, *(args.copollutant_check or [])]
    data = read_daily(args, columns, per_analysis=args.exposure)
    check_analysis_options(data, analyses)
    return write_and_print(
        data, args, outcomes=args.outcome, exposures=args.exposure, lags=lags, main_lag=main_lag, units=units,
        per=args.per, level=level, **model_options(args), **analyses,
    )  # fmt: skip
