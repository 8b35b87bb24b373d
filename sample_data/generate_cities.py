"""Regenerate the invented multi-city sample: ``sample_data/cities/*.csv`` and ``sample_data/cities_long.parquet``.

Run ``python sample_data/generate_cities.py`` from the repository root (``--out DIR`` to write elsewhere, e.g.
to check that the committed files are reproduced exactly). Every city and number is invented; the scenario
and its known truth are described in ``sample_data/cities/README.md`` and
:mod:`airhealth.cities.simulate_cities`.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from pathlib import Path

from airhealth._io import write_text, write_with
from airhealth.cities.simulate_cities import simulate_cities

#: The committed scenario: 20 cities, records of 1.5 to 3 years, one city with temperatures in kelvins.
SEED = 20261202
N_CITIES = 20
YEARS = 3
HERE = Path(__file__).resolve().parent


def write(out: Path) -> None:
    """Write one CSV per city into ``out/cities``, the long Parquet file and the true effects into ``out``."""
    scenario = simulate_cities(n_cities=N_CITIES, years=YEARS, seed=SEED, broken=True)
    folder = out / "cities"
    folder.mkdir(parents=True, exist_ok=True)
    for name, frame in scenario.frames.items():
        write_with(folder / f"{name}.csv", lambda tmp, f=frame: f.to_csv(tmp, index=False))
    long = scenario.long()
    write_with(out / "cities_long.parquet", lambda tmp: long.to_parquet(tmp, index=False))
    truth = scenario.truth.assign(
        mean_coef=scenario.mean_coef, between_sd=scenario.between_sd, broken=scenario.truth.city == scenario.broken_city
    )
    write_text(out / "cities_truth.csv", truth.to_csv(index=False))


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=HERE, help="folder to write into (default: sample_data/)")
    write(parser.parse_args(argv).out)
    return 0


if __name__ == "__main__":
    sys.exit(main())
