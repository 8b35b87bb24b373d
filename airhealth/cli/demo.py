"""``airhealth demo [--out DIR]``: ``airhealth report`` on the bundled Norhaven sample, plus its hourly NO2.

The demo is the report command with fixed arguments: the sample's three outcomes, four pollutants and
:data:`LAGS`, temperature as the weather control, the further analyses of :data:`ANALYSES` on the main model
(deaths and PM2.5 at lag 0-1: its diagnostics, the sensitivity analyses, the co-pollutant table, the design
comparison and the burden above the WHO 2021 24-hour PM2.5 guideline level), and an extra section on the
invented hourly NO2 readings.
"""

from __future__ import annotations

import argparse
from typing import Any

from .report import add_report_options, write_and_print

OUTCOMES = ("deaths_all", "admissions_respiratory", "admissions_cardiovascular")
POLLUTANTS = ("pm25", "pm10", "no2", "o3")
LAGS = ("0", "1", "2", "0-1", "dl0-5")
MAIN_LAG = "0-1"
#: The further analyses of the demo's main model (``write_report`` keywords, in the order shown).
ANALYSES = {
    "diagnostics": True,
    "sensitivity": True,  # the default checks of airhealth.sensitivity
    "copollutant_check": ["no2"],
    "compare_designs": True,
    "burden": "who-guideline:pm2.5:24h",  # WHO global air quality guidelines 2021: 15 µg/m³, 24-hour
}
TITLE = "Norhaven (invented city): short-term effects of air pollution, 2010–2023"


def register(sub: Any) -> None:
    """Add the ``demo`` sub-command."""
    p = sub.add_parser(
        "demo",
        help="run the report on the bundled sample data",
        description="Write the report (as 'airhealth report') for every outcome x pollutant x lag of the invented "
        f"Norhaven data (lags {', '.join(LAGS)}), with the diagnostics of the main model (deaths and PM2.5, "
        f"lag {MAIN_LAG}), its sensitivity analyses, a co-pollutant table, the time-series vs case-crossover "
        "comparison, the burden above the "
        "WHO 2021 24-hour PM2.5 guideline, and a section on its hourly NO2 monitoring data.",
    )
    add_report_options(p)
    p.set_defaults(func=run, title=TITLE)


def hourly_section() -> Any:
    """The monitoring-data section of the demo: Norhaven's hourly NO2 at three monitors, EU 24-h rule."""
    from ..prep.hourly import aggregate_daily, validity_rule
    from ..prep.hourly_input import clean_hourly
    from ..report.data_quality_section import hourly_quality_section
    from ..sample import load_sample_hourly

    clean = clean_hourly(load_sample_hourly(), time="time", value="no2_ppb", monitor="monitor")
    daily = aggregate_daily(clean, statistic="mean", convention="eu", name="no2_ppb")
    rule = validity_rule("mean", "eu")
    names = {"NHC": "city centre", "NHH": "harbour road (traffic)", "NHP": "park"}  # sample_data/generate_hourly.py
    return hourly_quality_section(
        clean, daily, value="no2_ppb", rule_note=rule.source, monitor_names=names, label="NO2 (ppb)"
    )


def run(args: argparse.Namespace) -> int:
    """Run the demo; returns the exit code."""
    from ..sample import load_sample

    return write_and_print(
        load_sample(), args, [hourly_section()], outcomes=list(OUTCOMES), exposures=list(POLLUTANTS),
        lags=list(LAGS), main_lag=MAIN_LAG, temperature="temperature", **ANALYSES,
    )  # fmt: skip
