"""``airhealth demo [--out DIR]``: the full one-city analysis on the bundled Norhaven sample."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

OUTCOMES = ("deaths_all", "admissions_respiratory", "admissions_cardiovascular")
POLLUTANTS = ("pm25", "pm10", "no2", "o3")
LAGS = ("0", "1", "2", "0-1")


def register(sub: Any) -> None:
    """Add the ``demo`` sub-command."""
    p = sub.add_parser(
        "demo",
        help="run the one-city analysis on the bundled sample data",
        description="Fit every outcome × pollutant × lag on the invented Norhaven data and "
        "write an HTML report with CSV tables and PNG figures.",
    )
    p.add_argument(
        "--out", type=Path, default=Path("airhealth-report"), help="output directory (default ./airhealth-report)"
    )
    p.add_argument(
        "--suppress-below",
        type=int,
        default=None,
        metavar="N",
        help="suppress health counts below N in the report's tables and figures (local disclosure rules)",
    )
    p.set_defaults(func=run)


def hourly_section() -> Any:
    """The monitoring-data section of the demo: Norhaven's hourly NO2 at three monitors, EU 24-h rule."""
    from ..prep.hourly import aggregate_daily, validity_rule
    from ..prep.hourly_input import clean_hourly
    from ..report.data_quality_section import hourly_quality_section
    from ..sample import load_sample_hourly

    clean = clean_hourly(load_sample_hourly(), time="time", value="no2_ppb", monitor="monitor")
    daily = aggregate_daily(clean, statistic="mean", convention="eu", name="no2_ppb")
    rule = validity_rule("mean", "eu")
    return hourly_quality_section(clean, daily, value="no2_ppb", rule_note=rule.source)


def run(args: argparse.Namespace) -> int:
    """Run the demo; returns the exit code."""
    import matplotlib

    matplotlib.use("Agg")
    from ..report.city_report import write_city_report
    from ..report.tables import format_effects
    from ..sample import load_sample

    data = load_sample()
    path, table = write_city_report(
        data,
        args.out,
        OUTCOMES,
        POLLUTANTS,
        LAGS,
        temperature="temperature",
        title="Norhaven (invented city): short-term effects of air pollution, 2010–2023",
        small_count_threshold=args.suppress_below,
        extra_sections=[hourly_section()],
    )
    import pandas as pd

    with pd.option_context("display.width", 160, "display.max_rows", 200):
        print(format_effects(table).to_string(index=False))
    print(f"\nreport written to {path}")
    print("Results are statistical associations, not proof of causation.")
    return 0
