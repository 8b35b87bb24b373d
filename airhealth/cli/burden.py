"""``airhealth burden DATA.csv --outcome COL --exposure COL --counterfactual (X0 | PRESET) ...``: attributable burden.

From a model fitted here (the fit options of ``airhealth fit``) or from a given coefficient and standard error
(``--coef B --se S``, e.g. a published estimate). Prints the totals, or the JSON record with ``--json``; with
``--out DIR`` writes the breakdown tables as CSV (small counts hidden with ``--suppress-below N``).
``--report DIR`` writes an HTML page of the burden section. ``--list-counterfactuals`` prints the presets with their
sources.
"""

from __future__ import annotations

import argparse
import json
import sys
import warnings
from pathlib import Path
from typing import Any

from .. import _io
from ..burden.simulation import DEFAULT_DRAWS, DEFAULT_SEED, MIN_DRAWS
from ..errors import SpecificationError
from .json_output import json_safe
from .options import (
    DAILY_FILE_HELP,
    add_lag_option,
    add_model_options,
    add_outcome_exposure,
    add_reading_options,
    confidence_level,
    model_options,
    parse_units,
    read_daily,
    single_lag,
)
from .remedies import with_command_line_remedy


def register(sub: Any) -> None:
    """Add the ``burden`` sub-command."""
    p = sub.add_parser(
        "burden",
        help="cases attributable to exposure above a counterfactual level (guideline, limit value or number)",
        description="Attributable number and fraction of cases above a counterfactual exposure level, with Monte "
        "Carlo intervals. A burden assumes the association is causal and the counterfactual achievable.",
    )
    p.add_argument("data", type=Path, nargs="?", help=DAILY_FILE_HELP)
    add_outcome_exposure(p, required=False)  # not needed with --list-counterfactuals
    add_lag_option(p)
    p.add_argument(
        "--counterfactual",
        metavar="X0|PRESET",
        help="level in the exposure's unit, or a preset such as who-guideline:pm2.5:24h (see --list-counterfactuals)",
    )
    p.add_argument(
        "--pollutant",
        help="the exposure's pollutant (pm2.5, pm10, no2, o3, so2, co), checked against a preset's; by default read "
        "from the exposure column's name",
    )
    p.add_argument("--coef", type=float, help="given log relative risk per unit (with --se) instead of fitting")
    p.add_argument("--se", type=float, help="standard error of --coef")
    p.add_argument(
        "--draws",
        type=int,
        default=DEFAULT_DRAWS,
        help=f"Monte Carlo draws (default {DEFAULT_DRAWS}, at least {MIN_DRAWS})",
    )
    p.add_argument("--seed", type=int, default=DEFAULT_SEED, help="seed of the draws (default fixed: reproducible)")
    p.add_argument("--side", default="above", help="above (default), below or both sides of the counterfactual")
    p.add_argument("--perspective", default="backward", help="distributed lags: backward (default) or forward")
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    p.add_argument("--out", type=Path, metavar="DIR", help="write the breakdown tables (CSV) to this folder")
    p.add_argument("--report", type=Path, metavar="DIR", help="write an HTML report of the burden to this folder")
    p.add_argument(
        "--suppress-below",
        type=int,
        metavar="N",
        help="hide counts below N in the written tables and report (disclosure rules)",
    )
    p.add_argument("--list-counterfactuals", action="store_true", help="print the counterfactual presets and exit")
    add_model_options(p)
    add_reading_options(p)
    p.set_defaults(func=run)


def _list_presets() -> int:
    from ..burden.presets import PRESETS

    for preset in PRESETS:
        print(preset.describe())
    return 0


def _required(args: argparse.Namespace) -> None:
    missing = [f"--{n}" for n in ("outcome", "exposure", "counterfactual") if getattr(args, n) is None]
    if args.data is None:
        missing.insert(0, "DATA.csv")
    if missing:
        raise SpecificationError(f"airhealth burden needs {', '.join(missing)} (or --list-counterfactuals).")
    if args.coef is not None and args.perspective != "backward":
        raise SpecificationError(
            f"--perspective {args.perspective} applies to distributed lags of a model fitted here; a given --coef "
            "is for a single day or moving average, whose burden has no perspective to choose. Leave out --perspective."
        )
    if (args.coef is None) != (args.se is None):
        given, absent = ("--coef", "--se") if args.se is None else ("--se", "--coef")
        raise SpecificationError(f"{given} needs {absent}: a coefficient without its standard error gives no interval.")
    for flag, folder in (("--out", args.out), ("--report", args.report)):
        _check_folder(flag, folder)


def _check_folder(flag: str, folder: Path | None) -> None:
    """Refuse, before any fitting, an output folder that is (or lies inside) an existing file."""
    if folder is None:
        return
    for path in (folder, *folder.parents):
        if path.exists() and not path.is_dir():
            raise SpecificationError(
                f"{flag} {str(folder)!r}: {str(path)!r} is an existing file, but {flag} takes a folder; "
                "give a new or existing folder path."
            )


def _compute(args: argparse.Namespace, level: float) -> Any:
    from ..burden import burden, burden_from_estimate
    from ..model.fitting import fit

    lag = single_lag(args)
    units = parse_units(args.unit, [args.exposure])
    unit = units.get(args.exposure, "µg/m³")
    options = {"draws": args.draws, "seed": args.seed, "side": args.side, "level": level, "pollutant": args.pollutant}
    if args.coef is not None:
        data = read_daily(args, [args.outcome, args.exposure])
        read = {k: v for k, v in model_options(args).items() if k in ("na_values",)}
        return burden_from_estimate(
            data, args.outcome, args.exposure, args.coef, args.se, args.counterfactual, lag=lag, unit=unit,
            date=args.date, **options, **read,
        )  # fmt: skip
    data = read_daily(args, [args.outcome, args.exposure, args.temperature, args.humidity])
    result = fit(data, outcome=args.outcome, exposure=args.exposure, lag=lag, units=units, **model_options(args))
    return burden(result, args.counterfactual, data=data, perspective=args.perspective, **options)


def _write_tables(result: Any, folder: Path, threshold: int | None) -> list[Path]:
    from ..report.burden_section import suppressed_burden_table

    written = []
    for by in result.breakdowns():
        table = suppressed_burden_table(result, by, threshold)
        path = folder / f"burden_by_{by}.csv"
        written.append(_io.write_with(path, lambda tmp, t=table: t.to_csv(tmp, index=False)))
    caution = folder / "CAUTION.txt"
    written.append(_io.write_text(caution, result.caution + "\n"))
    return written


def _print(result: Any) -> None:
    d = result.to_dict()
    print(
        f"attributable {d['outcome']}: {d['attributable']:.1f} ({d['attributable_low']:.1f} to "
        f"{d['attributable_high']:.1f}), fraction {d['fraction']:.3%} ({d['fraction_low']:.3%} to "
        f"{d['fraction_high']:.3%}), {d['n_days']} days"
    )
    print(f"counterfactual: {result.counterfactual.describe()}")
    m = d["missing_exposure_days"]
    if m["n"]:
        print(f"days with missing exposure left out: {m['n']} ({m['first']} to {m['last']})")
    for note in d["notes"]:
        print(f"note: {note}")
    print(f"caution: {d['caution']}")


def run(args: argparse.Namespace) -> int:
    """Compute and print the burden; returns the exit code."""
    if args.list_counterfactuals:
        return _list_presets()
    _required(args)
    level = confidence_level(args.confidence)
    if args.suppress_below is not None and args.suppress_below < 1:
        raise SpecificationError(f"--suppress-below must be a whole number >= 1, got {args.suppress_below}.")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            result = _compute(args, level)
        finally:
            for w in caught:
                print(f"warning: {with_command_line_remedy(str(w.message))}", file=sys.stderr)
    if args.out is not None:
        _write_tables(result, args.out, args.suppress_below)
    if args.report is not None:
        from ..report.burden_section import burden_section
        from ..report.html import write_html_report

        section = burden_section(result, suppress_below=args.suppress_below)
        title = f"Attributable burden: {args.outcome} and {args.exposure}"
        write_html_report([section], args.report, title=title, small_count_threshold=args.suppress_below)
    if args.json:
        print(json.dumps(json_safe(result.to_dict()), indent=2))
    else:
        _print(result)
    return 0
