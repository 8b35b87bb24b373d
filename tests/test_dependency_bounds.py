"""The dependency bounds in pyproject.toml are true: CI installs exactly the lower bounds and runs the suite.

``.ci/run`` runs the suite a second time with ``pip install -c .ci/oldest-constraints.txt -e ".[test]"``. That
proves the lower bounds only if the constraints file pins every requirement of ``[project] dependencies`` and
of the ``test`` extra at exactly its lower bound, so these tests parse both files and compare them.
Requirements carry lower bounds only (no caps, no pins): a cap would stop users from taking fixed releases.
"""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
CONSTRAINTS = ROOT / ".ci" / "oldest-constraints.txt"

# name, optional [extras], ">=" lower bound, nothing else (PEP 508 without markers or other operators)
LOWER_BOUND = re.compile(r"^([A-Za-z0-9][A-Za-z0-9._-]*)(\[[^\]]*\])?\s*>=\s*([0-9][0-9A-Za-z.!+-]*)$")
PIN = re.compile(r"^([A-Za-z0-9][A-Za-z0-9._-]*)\s*==\s*([0-9][0-9A-Za-z.!+-]*)$")


def _normalise(name: str) -> str:
    """PEP 503 name normalisation: case-insensitive, runs of '-', '_', '.' are the same."""
    return re.sub(r"[-_.]+", "-", name).lower()


def _pyproject() -> dict:
    with open(ROOT / "pyproject.toml", "rb") as f:
        return tomllib.load(f)


def _lower_bounds(requirements: list[str], where: str) -> dict[str, str]:
    bounds = {}
    for requirement in requirements:
        match = LOWER_BOUND.match(requirement.strip())
        assert match, (
            f"{where}: requirement {requirement!r} is not of the form 'name>=version'. Dependencies keep a "
            "lower bound only (no caps, pins or markers), so that .ci/oldest-constraints.txt can pin it."
        )
        bounds[_normalise(match.group(1))] = match.group(3)
    return bounds


def _tested_bounds() -> dict[str, str]:
    project = _pyproject()["project"]
    bounds = _lower_bounds(project["dependencies"], "[project] dependencies")
    test_extra = _lower_bounds(project["optional-dependencies"]["test"], "[project.optional-dependencies] test")
    overlap = sorted(set(bounds) & set(test_extra))
    assert not overlap, f"{overlap} appear both in dependencies and in the test extra; keep one bound each."
    return {**bounds, **test_extra}


def _pins(text: str) -> dict[str, str]:
    pins: dict[str, str] = {}
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.split("#", 1)[0].strip()
        if not line:
            continue
        match = PIN.match(line)
        assert match, f"{CONSTRAINTS.name} line {number}: {raw!r} is not of the form 'name==version'."
        name = _normalise(match.group(1))
        assert name not in pins, f"{CONSTRAINTS.name} line {number}: {match.group(1)} is pinned twice."
        pins[name] = match.group(2)
    return pins


def _mismatches(bounds: dict[str, str], pins: dict[str, str]) -> list[str]:
    """What differs between the lower bounds and the pins, each said with what to do."""
    problems = [
        f"add {name}=={bound} to .ci/oldest-constraints.txt" for name, bound in bounds.items() if name not in pins
    ]
    problems += [
        f"remove {name}=={pins[name]}: pyproject.toml does not require {name}" for name in pins if name not in bounds
    ]
    problems += [
        f"{name}: pyproject.toml says >={bounds[name]} but .ci/oldest-constraints.txt pins "
        f"=={pins[name]}; make them equal"
        for name in bounds
        if name in pins and pins[name] != bounds[name]
    ]
    return problems


def test_constraints_pin_exactly_the_lower_bounds_of_pyproject() -> None:
    problems = _mismatches(_tested_bounds(), _pins(CONSTRAINTS.read_text(encoding="utf-8")))
    assert not problems, "; ".join(problems)


def test_a_moved_missing_or_extra_pin_is_named() -> None:
    bounds = {"numpy": "1.26", "scipy": "1.11"}
    assert _mismatches(bounds, _pins("numpy==1.26\nscipy==1.11  # comment\n")) == []
    assert _mismatches(bounds, _pins("numpy==1.26.4\nscipy==1.11")) == [
        "numpy: pyproject.toml says >=1.26 but .ci/oldest-constraints.txt pins ==1.26.4; make them equal"
    ]
    assert _mismatches(bounds, _pins("NumPy==1.26\npandas==2.1")) == [
        "add scipy==1.11 to .ci/oldest-constraints.txt",
        "remove pandas==2.1: pyproject.toml does not require pandas",
    ]


@pytest.mark.parametrize("requirement", ["numpy>=1.26,<2", "numpy==1.26", "numpy", "numpy>=1.26; python_version<'4'"])
def test_a_cap_pin_or_missing_bound_is_refused(requirement: str) -> None:
    with pytest.raises(AssertionError, match=r"is not of the form 'name>=version'. Dependencies keep a lower bound"):
        _lower_bounds([requirement], "dependencies")


def test_every_extra_keeps_lower_bounds_only() -> None:
    for extra, requirements in _pyproject()["project"]["optional-dependencies"].items():
        assert _lower_bounds(requirements, f"[project.optional-dependencies] {extra}")


def test_ci_installs_the_constraints_and_runs_the_suite_again() -> None:
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert 'pip install -c .ci/oldest-constraints.txt -e ".[test]"' in ci
    oldest = ci[ci.index("pip install -c .ci/oldest-constraints.txt") :]
    assert "python -m pytest -q" in oldest, "the oldest-versions venv must run the suite"
