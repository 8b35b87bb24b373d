"""Shared test fixtures: the Norhaven sample data and access to Rscript."""

from __future__ import annotations

import json
import os
import shutil
import subprocess
from pathlib import Path

import pandas as pd
import pytest
from hypothesis import settings

import airhealth

# Property tests draw the same examples on every machine and run (fixed seeds, like every other test), and
# keep no example database between runs, so a fresh clone and a developer's tree test the same cases.
settings.register_profile("airhealth", derandomize=True, database=None)
settings.load_profile("airhealth")


@pytest.fixture(scope="session")
def _sample_once() -> pd.DataFrame:
    return airhealth.load_sample()


@pytest.fixture
def sample(_sample_once: pd.DataFrame) -> pd.DataFrame:
    """The aligned Norhaven sample (a fresh deep copy per test, so tests cannot leak changes)."""
    return _sample_once.copy(deep=True)


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
