"""Shared test fixtures: the Norhaven sample data, access to Rscript and the R reference folder.

The folder ``tests/reference`` is put on ``sys.path`` here, so a test imports an input script of an R
reference as ``from make_dl_input import write_input``.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import settings

import airhealth

# Property tests draw the same examples on every machine and run (fixed seeds, like every other test), and
# keep no example database between runs, so a fresh clone and a developer's tree test the same cases.
settings.register_profile("airhealth", derandomize=True, database=None)
settings.load_profile("airhealth")

#: The R reference scripts, their input scripts (``make_*_input.py``) and the frozen JSON they wrote.
REFERENCE_DIR = Path(__file__).resolve().parent / "reference"
if str(REFERENCE_DIR) not in sys.path:
    sys.path.insert(0, str(REFERENCE_DIR))


def frozen_reference(name: str) -> dict:
    """The committed ``tests/reference/<name>.json``, written by the R script ``<name>.R``."""
    return json.loads((REFERENCE_DIR / f"{name}.json").read_text())


def rel_diff(a, b) -> float:
    """The largest relative difference of ``a`` from the reference ``b`` (numbers or arrays of the same shape)."""
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    return float(np.max(np.abs(a - b) / np.abs(b)))


@pytest.fixture(scope="session")
def _sample_once() -> pd.DataFrame:
    return airhealth.load_sample()


@pytest.fixture
def sample(_sample_once: pd.DataFrame) -> pd.DataFrame:
    """The aligned Norhaven sample (a fresh deep copy per test, so tests cannot leak changes)."""
    return _sample_once.copy(deep=True)


@pytest.fixture
def three_years(sample: pd.DataFrame) -> pd.DataFrame:
    """The sample's first three years, 2010-2012 (a fresh copy per test)."""
    return sample[sample["date"] < "2013-01-01"].reset_index(drop=True)


@pytest.fixture(scope="session")
def sample_csv(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The whole sample written once as a CSV file, for the command-line tests (read it, never write it)."""
    path = tmp_path_factory.mktemp("sample_csv") / "norhaven.csv"
    airhealth.load_sample().to_csv(path, index=False)
    return path


def r_unavailable(reason: str) -> None:
    """Skip a live R check with ``reason``; in CI (``AIRHEALTH_REQUIRE_R=1``) fail instead, so R checks always run."""
    if os.environ.get("AIRHEALTH_REQUIRE_R") == "1":
        pytest.fail(f"{reason} (AIRHEALTH_REQUIRE_R=1: CI must run the live R checks)")
    pytest.skip(reason)


def run_r_reference(rscript: str, script: Path, *arguments: Path | str, out: Path) -> dict:
    """Run a committed R reference script (``Rscript script arguments... out``) and read the JSON it writes.

    A missing R package skips the check (fails under ``AIRHEALTH_REQUIRE_R=1``); any other R error fails it.
    """
    proc = subprocess.run(
        [rscript, str(script), *map(str, arguments), str(out)], capture_output=True, text=True, timeout=300, check=False
    )
    if proc.returncode != 0 and "there is no package called" in proc.stderr:
        r_unavailable(f"an R package needed by the reference script is missing: {proc.stderr.strip()[-200:]}")
    assert proc.returncode == 0, proc.stderr
    return json.loads(Path(out).read_text())


@pytest.fixture(scope="session")
def rscript() -> str:
    """Path of Rscript; skips the test when base R is not installed (fails under AIRHEALTH_REQUIRE_R=1)."""
    path = shutil.which("Rscript")
    if path is None:
        r_unavailable("Rscript is not on PATH: live cross-checks against base R skipped (frozen values still tested)")
    return path


@pytest.fixture(scope="session")
def demo_report(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The folder of ``airhealth demo --suppress-below 5``, written once per test session (it fits 60 models)."""
    from airhealth.cli.main import main

    out = tmp_path_factory.mktemp("demo") / "report"
    assert main(["demo", "--out", str(out), "--suppress-below", "5"]) == 0
    return out
