"""``airhealth fit DATA.csv --outcome COL --exposure COL ...``: one model, printed or as JSON."""

from __future__ import annotations

import argparse
import json
import math
import sys
import warnings
from pathlib import Path
from typing import Any

import pandas as pd

from .tables import read_table


def register(sub: Any) -> None:
    """Add the ``fit`` sub-command."""
    p = sub.add_parser(
        "fit",
        help="fit the time-series model for one outcome and one exposure",
        description="Fit a quasi-Poisson time-series model of daily counts and report the relative risk.",
    )
    p.add_argument("data", type=Path, help="CSV file with one row per day")
    p.add_argument("--outcome", required=True, help="column of daily counts")
    p.add_argument("--exposure", required=True, help="column of the daily pollutant level")
    p.add_argument("--temperature", default=None, help="column of daily mean temperature (default: none)")
    p.add_argument("--date", default="date", help='date column (default "date")')
    p.add_argument("--lag", default="0-1", help='lag: "0", "2", "0-1", "dl0-5", "dl0-7:poly3", ... (default "0-1")')
    p.add_argument("--trend-df-per-year", type=float, default=7.0, help="df per year of the time spline (default 7)")
    p.add_argument("--per", type=float, default=10.0, help="exposure increase for the relative risk (default 10)")
    p.add_argument("--humidity", default=None, help="column of relative humidity (spline, 3 df)")
    p.add_argument("--holidays", default=None, metavar="COUNTRY", help="ISO country code for a holiday indicator")
    p.add_argument("--family", default="quasipoisson", help="quasipoisson (default), poisson or negbin")
    p.add_argument("--seasonality", default="spline", help="spline (default) or fourier")
    p.add_argument("--sep", default=",", help='field separator of the CSV (default ","; e.g. ";" or tab)')
    p.add_argument("--decimal", default=".", help='decimal mark of the CSV (default "."; e.g. ",")')
    p.add_argument("--json", action="store_true", help="print the result as JSON")
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


def _fit(data: pd.DataFrame, args: argparse.Namespace) -> Any:
    from ..model.fitting import fit

    return fit(
        data,
        outcome=args.outcome,
        exposure=args.exposure,
        lag=args.lag,
        temperature=args.temperature,
        trend_df_per_year=args.trend_df_per_year,
        date=args.date,
        humidity=args.humidity,
        holidays=args.holidays,
        family=args.family,
        seasonality=args.seasonality,
    )


def run(args: argparse.Namespace) -> int:
    """Fit and print; returns the exit code.

    Warnings raised while reading and fitting are printed to stderr even when the fit then fails, so a
    warning that explains an error (a calendar gap, say) is not lost.
    """
    sep = "\t" if args.sep in ("tab", "\\t") else args.sep
    data = read_table(args.data, sep=sep, decimal=args.decimal)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            result = _fit(data, args)
        finally:
            for w in caught:
                print(f"warning: {w.message}", file=sys.stderr)
    record = result.to_dict(per=args.per)
    if args.json:
        print(json.dumps(_clean(record), indent=2))
    else:
        print(result.effect(per=args.per))
        print(
            f"dispersion {result.dispersion:.3f}, QAIC {result.qaic:.1f}, {result.n_days} days used, "
            f"{len(result.dropped)} dropped"
        )
        warned = {str(w.message) for w in caught}
        for note in result.notes:  # how the fit was obtained (e.g. a negative binomial fitted as Poisson)
            if note not in warned:
                print(f"note: {note}")
    return 0
