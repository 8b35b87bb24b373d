"""Regenerate the invented Norhaven sample tables.

Run ``python sample_data/generate_sample.py`` from the repository root. The tables are written to both
``sample_data/`` and ``airhealth/data/`` (the package copy). Use ``--out DIR`` (repeatable) to write
somewhere else instead, for example to check that the committed files are reproduced exactly.

Norhaven is a fictional city; nothing here describes a real place. The true pollutant effects built into
the counts are :data:`TRUE_EFFECTS` (see ``sample_data/README.md``).
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from pathlib import Path

import pandas as pd

from airhealth._io import write_with
from airhealth.sample import SAMPLE_END, SAMPLE_FILES, SAMPLE_SEED, SAMPLE_START
from airhealth.simulate import simulate_city

#: Seed of ``numpy.random.default_rng`` used for the committed tables.
SEED = SAMPLE_SEED
START = SAMPLE_START
END = SAMPLE_END
#: Fraction of each pollutant's (remaining) rows blanked at random, and length of the monitor outage whose
#: dates are absent from the pollution table.
MISSING_FRACTION = 0.015
OUTAGE_DAYS = 9

#: True pollutant effects: (outcome, pollutant) -> lag window (moving average of lags a..b) and relative
#: risk per 10 µg/m³ (log relative risk per 1 µg/m³ = log(rr_per_10) / 10).
TRUE_EFFECTS: dict[tuple[str, str], dict[str, str | float]] = {
    ("deaths_all", "pm25"): {"lag": "0-1", "rr_per_10": 1.010},
    ("admissions_respiratory", "no2"): {"lag": "0", "rr_per_10": 1.015},
    ("admissions_respiratory", "o3"): {"lag": "0-1", "rr_per_10": 1.008},
    ("admissions_cardiovascular", "pm10"): {"lag": "0-1", "rr_per_10": 1.006},
}

REPO = Path(__file__).resolve().parent.parent
DEFAULT_OUTPUTS = (REPO / "sample_data", REPO / "airhealth" / "data")


def build_tables() -> dict[str, pd.DataFrame]:
    """Simulate the three Norhaven tables with the fixed seed."""
    tables = simulate_city(
        SEED,
        START,
        END,
        name="Norhaven",
        effects=TRUE_EFFECTS,
        missing_fraction=MISSING_FRACTION,
        outage_days=OUTAGE_DAYS,
    )
    return {key: tables[key] for key in SAMPLE_FILES}


def table_to_csv(table: pd.DataFrame) -> str:
    """Format one table as CSV text: ISO dates, integers as such, one decimal for measurements."""
    return table.to_csv(index=False, date_format="%Y-%m-%d", float_format="%.1f", na_rep="", lineterminator="\n")


def _write_readable(path: Path, text: str) -> None:
    path.write_bytes(text.encode("utf-8"))
    path.chmod(0o644)  # the atomic temporary file is created private (0600)


def write_tables(directories: Sequence[Path] = DEFAULT_OUTPUTS) -> list[Path]:
    """Write every table to every directory (atomically) and return the written paths."""
    written = []
    texts = {key: table_to_csv(table) for key, table in build_tables().items()}
    for directory in directories:
        for key, text in texts.items():
            path = Path(directory) / SAMPLE_FILES[key]
            write_with(path, lambda tmp, text=text: _write_readable(tmp, text))
            written.append(path)
    return written


def main(argv: Sequence[str] | None = None) -> int:
    """Command-line entry point."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", action="append", type=Path, help="output directory (repeatable)")
    args = parser.parse_args(argv)
    for path in write_tables(args.out or DEFAULT_OUTPUTS):
        print(f"wrote {path}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
