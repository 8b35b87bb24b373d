"""``airhealth fit DATA.csv --outcome COL --exposure COL ...``: one model, printed or as JSON."""

from __future__ import annotations

import argparse
import json
import sys
import warnings
from pathlib import Path
from typing import Any

from .json_output import json_safe
from .options import (
    DAILY_FILE_HELP,
    add_copollutant_options,
    add_design_options,
    add_label_option,
    add_lag_option,
    add_model_options,
    add_outcome_exposure,
    add_reading_options,
    confidence_level,
    copollutant_options,
    design_options,
    model_options,
    parse_labels,
    parse_units,
    read_daily,
    single_lag,
)
from .remedies import with_command_line_remedy


def register(sub: Any) -> None:
    """Add the ``fit`` sub-command."""
    p = sub.add_parser(
        "fit",
        help="fit the time-series model for one outcome and one exposure",
        description="Fit a quasi-Poisson time-series model of daily counts and report the relative risk.",
    )
    p.add_argument("data", type=Path, help=DAILY_FILE_HELP)
    add_outcome_exposure(p)
    add_lag_option(p)
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    add_label_option(p)
    add_model_options(p)
    add_copollutant_options(p)
    add_design_options(p)
    add_reading_options(p)
    p.set_defaults(func=run)


def _fit(args: argparse.Namespace) -> Any:
    from ..model.fitting import fit

    lag = single_lag(args)
    units = parse_units(args.unit, [args.exposure, *args.copollutant])
    columns = [args.outcome, args.exposure, args.temperature, args.humidity, *args.copollutant, args.modifier]
    data = read_daily(args, columns, per_analysis=[args.modifier] if args.modifier else ())
    options = {**model_options(args), **copollutant_options(args), **design_options(args)}
    return fit(data, outcome=args.outcome, exposure=args.exposure, lag=lag, units=units, **options)


def _print_text(result: Any, per: float, level: float) -> None:
    """The effect (or the effects by group and their test) and any co-pollutant effects, as text."""
    if result.groups:
        test = result.modification_test()
        print(f"{result.spec.exposure} lag {result.spec.lag.label}, effect by {result.spec.modifier} (RR per {per:g}):")
        for row in result.effects_by_group(per=per, level=level).itertuples():
            print(f"  {row.group}: RR {row.rr:.4f} [{row.rr_low:.4f}, {row.rr_high:.4f}], {row.n_days} days")
        print(f"  equal effects: Wald chi-square {test['statistic']:.3f} on {test['df']} df, p = {test['p_value']:.3g}")
    else:
        print(result.effect(per=per, level=level))
    for row in result.copollutant_effects(per=per, level=level).itertuples():
        print(
            f"co-pollutant {row.copollutant} (adjusted for {result.spec.exposure}): RR per {per:g} {row.unit} "
            f"{row.rr:.4f} [{row.rr_low:.4f}, {row.rr_high:.4f}]; correlation with the exposure {row.correlation:.2f}"
        )


def run(args: argparse.Namespace) -> int:
    """Fit and print; returns the exit code.

    Warnings raised while reading and fitting are printed to stderr even when the fit then fails, so a
    warning that explains an error (a calendar gap, say) is not lost.
    """
    level = confidence_level(args.confidence)
    labels = parse_labels(args.label)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            result = _fit(args)
        finally:
            for w in caught:
                print(f"warning: {with_command_line_remedy(str(w.message))}", file=sys.stderr)
    record = result.to_dict(per=args.per, level=level)
    if args.json:
        print(json.dumps(json_safe(record), indent=2))
    else:
        if labels:
            from ..report.labels import display_name

            print(f"{display_name(args.outcome, labels)} and {display_name(args.exposure, labels)}:")
        _print_text(result, args.per, level)
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
