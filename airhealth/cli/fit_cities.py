"""``airhealth fit-cities (FOLDER | LONG.csv --city COL | DATA.parquet --city COL) ... --out ESTIMATES.csv``.

The first stage of a multi-city study: the same model in every city, on local processes (default), in this
process (``--executor serial``) or on a dask cluster (``--executor dask --scheduler ADDRESS``). The table
written has one row per city (see ``docs/cities.md``); a distributed lag's vectors are the columns
``basis_coef_*`` and ``basis_cov_*`` (:mod:`airhealth.cities.estimates_table`), and a JSON file beside it
(``ESTIMATES.json``) records the model, the lags and the lag basis.
"""

from __future__ import annotations

import argparse
import json
import sys
import warnings
from pathlib import Path
from typing import Any

from .._io import write_text, write_with
from ..errors import FitError
from .options import (
    add_lag_option,
    add_model_options,
    add_outcome_exposure,
    confidence_level,
    model_options,
    parse_units,
    single_lag,
)
from .remedies import with_command_line_remedy


def register(sub: Any) -> None:
    """Add the ``fit-cities`` sub-command."""
    p = sub.add_parser(
        "fit-cities",
        help="fit the same model in every city (first stage of a multi-city study)",
        description="Fit the same time-series model in every city; write one row of estimates per city.",
    )
    p.add_argument("data", type=Path, help="folder of CSV files (one per city), or a CSV or Parquet file with --city")
    p.add_argument("--city", metavar="COL", help="column of city names (a single CSV or Parquet file)")
    add_outcome_exposure(p)
    add_lag_option(p)
    p.add_argument("--out", required=True, type=Path, metavar="ESTIMATES.csv", help="file of the city estimates")
    g = p.add_argument_group("running")
    g.add_argument("--executor", default="local", choices=["local", "dask", "serial"], help="where cities run")
    g.add_argument("--scheduler", metavar="ADDRESS", help="dask scheduler address, e.g. tcp://10.0.0.5:8786")
    g.add_argument(
        "--connect-timeout", type=float, default=10.0, metavar="S", help="seconds to reach the dask scheduler (10)"
    )
    g.add_argument("--workers", type=int, metavar="N", help="local worker processes (default: the machine's cores)")
    g.add_argument("--retries", type=int, default=1, help="reruns of a city whose worker crashed (default 1)")
    g.add_argument("--quiet", action="store_true", help="no progress bar")
    r = p.add_argument_group("reading the files")
    r.add_argument("--date", default="date", metavar="COL", help='date column (default "date")')
    r.add_argument("--sep", default=",", help='field separator of CSV files (default ","; e.g. ";" or tab)')
    r.add_argument("--decimal", default=".", help='decimal mark of CSV files (default ".")')
    r.add_argument("--encoding", default="utf-8", help="text encoding of CSV files (default utf-8)")
    r.add_argument("--date-format", metavar="FMT", help="format of the dates if not ISO, e.g. %%d/%%m/%%Y")
    r.add_argument("--na-values", nargs="+", metavar="CODE", help="values meaning missing, e.g. -999")
    add_model_options(p)
    p.set_defaults(func=run)


def _cities(args: argparse.Namespace) -> Any:
    from ..cities.inputs import CsvFolder
    from ..errors import SpecificationError

    sep = "\t" if args.sep in ("tab", "\\t") else args.sep
    if args.data.is_dir() and args.city is None:
        return CsvFolder(args.data, sep=sep, decimal=args.decimal, encoding=args.encoding)
    if args.data.suffix.lower() == ".csv" and (sep, args.decimal, args.encoding) != (",", ".", "utf-8"):
        raise SpecificationError("--sep, --decimal and --encoding apply to a folder of CSV files only.")
    return args.data


def _executor(args: argparse.Namespace) -> tuple[Any, Any]:
    from ..cities.executors import connect_dask
    from ..errors import SpecificationError

    if args.executor != "dask":
        if args.scheduler:
            raise SpecificationError("--scheduler applies to --executor dask only.")
        return None, (None if args.executor == "local" else "serial")
    if not args.scheduler:
        raise SpecificationError("--executor dask needs --scheduler ADDRESS, e.g. tcp://10.0.0.5:8786.")
    return connect_dask(args.scheduler, timeout=args.connect_timeout)


def run(args: argparse.Namespace) -> int:
    """Fit every city and write the estimates; returns the exit code."""
    from ..cities.estimates_table import flatten
    from ..cities.first_stage import fit_cities
    from ..errors import SpecificationError

    level = confidence_level(args.confidence)
    if args.out.suffix.lower() == ".json":
        raise SpecificationError(f"--out {args.out} ends in .json, the name of the model file beside it: use .csv.")
    lag = single_lag(args)
    options = model_options(args)
    options["date_format"] = args.date_format
    units = parse_units(args.unit, [args.exposure])
    cities = _cities(args)
    client, executor = _executor(args)
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            table = fit_cities(
                cities, executor, city=args.city, show_progress=not args.quiet, retries=args.retries,
                workers=args.workers if args.executor == "local" else None, per=args.per, level=level,
                outcome=args.outcome, exposure=args.exposure, lag=lag, units=units,
                **options,
            )  # fmt: skip
    finally:
        if client is not None:
            client.close()
    for w in caught:
        print(f"warning: {with_command_line_remedy(str(w.message))}", file=sys.stderr)
    flat = flatten(table)
    write_with(args.out, lambda tmp: flat.to_csv(tmp, index=False), make_parents=False)
    meta = {k: v for k, v in table.attrs.items() if k != "lag_basis"}
    meta["lag_basis"] = table.attrs["lag_basis"].tolist()
    sidecar = args.out.with_suffix(".json")
    write_text(sidecar, json.dumps(meta, indent=2) + "\n", make_parents=False)
    fitted = int((table["error"] == "").sum())
    if fitted == 0:
        first = table.iloc[0]
        raise FitError(
            f"none of the {len(table)} cities could be fitted; first, {first['city']}: {first['error']} "
            f"Every city's message is in the 'error' column of {args.out}."
        )
    print(f"{fitted} of {len(table)} cities fitted; estimates written to {args.out} (model in {sidecar.name})")
    return 0
