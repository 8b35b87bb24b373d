"""``airhealth fit DATA.csv --outcome COL --exposure COL ...``: one model, printed or as JSON."""

from __future__ import annotations

import argparse
import json
import math
import sys
import warnings
from pathlib import Path
from typing import Any

from .options import (
    add_design_options,
    add_model_options,
    add_reading_options,
    check_min_count,
    confidence_level,
    design_options,
    model_options,
    parse_units,
    read_daily,
    with_min_count,
)
from .remedies import with_command_line_remedy


def register(sub: Any) -> None:
    """Add the ``fit`` sub-command."""
    p = sub.add_parser(
        "fit",
        help="fit the time-series model for one outcome and one exposure",
        description="Fit a quasi-Poisson time-series model of daily counts and report the relative risk.",
    )
    p.add_argument("data", type=Path, help="CSV file with one row per day (- for standard input)")
    p.add_argument("--outcome", required=True, help="column of daily counts")
    p.add_argument("--exposure", required=True, help="column of the daily pollutant level")
    p.add_argument("--lag", default="0-1", help='lag: "0", "2", "0-1", "dl0-5", "dl0-7:poly3", ... (default "0-1")')
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    add_model_options(p)
    add_design_options(p)
    add_reading_options(p)
    p.set_defaults(func=run)


def _clean(value: Any) -> Any:
    """JSON-safe values: NaN and infinities become null."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_clean(v) for v in value]
    if hasattr(value, "item"):
        return _clean(value.item())
    return value


def _fit(args: argparse.Namespace) -> Any:
    from ..model.fitting import fit

    lag = with_min_count(args.lag, args.min_count)
    check_min_count([lag], args.min_count)
    units = parse_units(args.unit, [args.exposure])
    data = read_daily(args, [args.outcome, args.exposure, args.temperature, args.humidity])
    options = model_options(args) | design_options(args)
    return fit(data, outcome=args.outcome, exposure=args.exposure, lag=lag, units=units, **options)


def run(args: argparse.Namespace) -> int:
    """Fit and print; returns the exit code.

    Warnings raised while reading and fitting are printed to stderr even when the fit then fails, so a
    warning that explains an error (a calendar gap, say) is not lost.
    """
    level = confidence_level(args.confidence)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            result = _fit(args)
        finally:
            for w in caught:
                print(f"warning: {with_command_line_remedy(str(w.message))}", file=sys.stderr)
    record = result.to_dict(per=args.per, level=level)
    if args.json:
        print(json.dumps(_clean(record), indent=2))
    else:
        print(result.effect(per=args.per, level=level))
        print(
            f"dispersion {result.dispersion:.3f}, QAIC {result.qaic:.1f}, {result.n_days} days used, "
            f"{len(result.dropped)} dropped"
        )
        if result.hac_lags is not None:
            print(f"intervals: Newey-West (HAC), truncation lag {result.hac_lags} days")
        if result.strata is not None:
            s = result.strata
            print(
                f"time-stratified case-crossover: {s['n_strata']} strata (year x month x day of week); left out: "
                f"{s['n_strata_without_events']} without events, {s['n_strata_single_day']} with one usable day"
            )
        warned = {str(w.message) for w in caught}
        for note in result.notes:  # how the fit was obtained (e.g. a negative binomial fitted as Poisson)
            if note not in warned:
                print(f"note: {note}")
    return 0
