"""``airhealth pool ESTIMATES.csv --estimate COL --se COL [--method reml|dl|fixed] [--moderator COL ...]``.

Pools city estimates (the table ``fit-cities`` writes, or any table of estimates and standard errors) by
random-effects meta-analysis and prints the pooled relative risk and the heterogeneity, or JSON with
``--json``. Rows with a message in an ``error`` column (cities whose fit failed) are left out with a note
naming them.
"""

from __future__ import annotations

import argparse
import json
import sys
import warnings
from pathlib import Path
from typing import Any

from .json_output import json_safe
from .options import confidence_level
from .remedies import with_command_line_remedy
from .tables import read_table


def register(sub: Any) -> None:
    """Add the ``pool`` sub-command."""
    p = sub.add_parser(
        "pool",
        help="pool city estimates by random-effects meta-analysis (second stage)",
        description="Pool city estimates (log relative risks per unit and their standard errors).",
    )
    p.add_argument("estimates", type=Path, help="CSV file with one row per city (- for standard input)")
    p.add_argument("--estimate", default="coef", metavar="COL", help='column of the estimates (default "coef")')
    p.add_argument("--se", default="se", metavar="COL", help='column of their standard errors (default "se")')
    p.add_argument("--city", default="city", metavar="COL", help='column of city names (default "city")')
    p.add_argument("--method", default="reml", choices=["reml", "dl", "fixed"], help="between-city variance")
    p.add_argument("--moderator", action="append", default=[], metavar="COL", help="city-level column (repeatable)")
    p.add_argument("--per", type=float, default=10.0, help="exposure increase for the relative risk (default 10)")
    p.add_argument("--confidence", default="0.95", metavar="LEVEL", help="confidence level (default 0.95)")
    p.add_argument("--sep", default=",", help='field separator (default ",")')
    p.add_argument("--json", action="store_true", help="print the result as JSON")
    p.add_argument(
        "--report",
        type=Path,
        default=None,
        metavar="DIR",
        help="also write an HTML report to DIR: pooled table, forest plot and, when the estimates hold lag vectors "
        "(fit-cities with a distributed lag), the pooled lag curve",
    )
    p.set_defaults(func=run)


def _write_report(args: argparse.Namespace, frame: Any, result: Any, left_out: list[str]) -> Path:
    """``--report DIR``: the many-cities report, with the model file beside the estimates when there is one."""
    from ..report.cities_report import lag_curve_pool, write_cities_report

    meta: dict[str, Any] = {}
    sidecar = Path(args.estimates).with_suffix(".json")
    if str(args.estimates) != "-" and sidecar.is_file():
        meta = json.loads(sidecar.read_text(encoding="utf-8"))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the cities left out were already noted, and are named in the report
        lag_pool = lag_curve_pool(frame, args.method)
    what = " and ".join(str(meta[k]) for k in ("outcome", "exposure") if k in meta)
    notes = (f"Cities left out because their fit failed: {', '.join(left_out)}.",) if left_out else ()
    return write_cities_report(
        result, args.report, unit=str(meta.get("unit", "units")), lag_pool=lag_pool, basis=meta.get("lag_basis"),
        lags=meta.get("lags"), title=f"Many cities: {what}" if what else "Many cities: pooled estimates", notes=notes,
    )  # fmt: skip


def _record(result: Any, left_out: list[str]) -> dict[str, Any]:
    record = result.to_dict()
    record["prediction_low"], record["prediction_high"] = record["rr_pi_low"], record["rr_pi_high"]
    record["left_out"] = left_out
    record["caution"] = "pooled associations between exposure and health; not proof of causation"
    return record


def run(args: argparse.Namespace) -> int:
    """Pool and print; returns the exit code."""
    from ..cities.pooling import pool
    from ..errors import DataError

    level = confidence_level(args.confidence)
    if args.report is not None:  # refused before any work
        from ..report.city_report import check_output_folder

        check_output_folder(args.report)
    frame = read_table(args.estimates, sep="\t" if args.sep in ("tab", "\\t") else args.sep)
    if args.city != "city":
        if args.city not in frame.columns:
            raise DataError(f"the city column {args.city!r} is not in {args.estimates.name}; its columns are "
                            f"{[str(c) for c in frame.columns]}.")  # fmt: skip
        frame = frame.drop(columns=[c for c in ("city",) if c in frame.columns]).rename(columns={args.city: "city"})
    left_out: list[str] = []
    if "error" in frame.columns and "city" in frame.columns:
        failed = frame["error"].notna() & (frame["error"].astype(str).str.strip() != "")
        left_out = frame.loc[failed, "city"].astype(str).tolist()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = pool(frame, estimate=args.estimate, se=args.se, method=args.method,
                      moderators=args.moderator or None, level=level, per=args.per)  # fmt: skip
    for w in caught:
        print(f"note: {with_command_line_remedy(str(w.message))}", file=sys.stderr)
    record = _record(result, left_out)
    path = None if args.report is None else _write_report(args, frame, result, left_out)
    if args.json:
        print(json.dumps(json_safe(record), indent=2))
        if path is not None:
            print(f"report written to {path}", file=sys.stderr)
        return 0
    pct = round(level * 100)
    print(
        f"pooled RR per {args.per:g} units ({args.method}, {result.k} cities) = {record['rr']:.4f} "
        f"({pct}% CI {record['rr_low']:.4f}-{record['rr_high']:.4f}); prediction interval for a new city "
        f"{record['prediction_low']:.4f}-{record['prediction_high']:.4f}"
    )
    print(f"heterogeneity: tau2 = {record['tau2']:.4g}, I2 = {record['i2']:.1f}%, Q = {record['q']:.2f} "
          f"(df {record['q_df']}, p = {record['q_p']:.3g})")  # fmt: skip
    if "qm" in record:
        print(f"moderators {', '.join(record['moderators'])}: QM = {record['qm']:.2f} (df {record['qm_df']}, "
              f"p = {record['qm_p']:.3g})")  # fmt: skip
    print("Pooled associations, not proof of causation.")
    if path is not None:
        print(f"report written to {path}")
    return 0
