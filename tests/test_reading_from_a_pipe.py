"""A table given through a pipe (process substitution ``<(...)`` or ``-`` for standard input) is read once.

A pipe cannot be read twice; reading it again for the header check used to end in a raw pandas
``EmptyDataError``. Reference: the same file given by its path (the same fit, printed identically).
"""

from __future__ import annotations

import io
import os
import sys
import threading
from pathlib import Path

import pytest

from airhealth.cli.main import main

ARGS = ["--outcome", "deaths_all", "--exposure", "pm25", "--temperature", "temperature"]


@pytest.fixture
def city_csv(sample, tmp_path: Path) -> Path:
    path = tmp_path / "city.csv"
    sample[["date", "deaths_all", "pm25", "temperature"]].iloc[:800].to_csv(path, index=False)
    return path


def _through_a_pipe(content: bytes) -> str:
    """A readable pipe holding ``content`` (what ``<(cat file)`` gives), as a /dev/fd path."""
    read_end, write_end = os.pipe()

    def feed() -> None:
        with os.fdopen(write_end, "wb") as out:
            out.write(content)

    threading.Thread(target=feed, daemon=True).start()
    return f"/dev/fd/{read_end}"


@pytest.mark.skipif(not Path("/dev/fd").is_dir(), reason="needs /dev/fd (Linux, macOS)")
def test_process_substitution_fits_as_the_file_does(city_csv, capsys):
    capsys.readouterr()
    assert main(["fit", str(city_csv), *ARGS]) == 0
    expected = capsys.readouterr().out
    pipe = _through_a_pipe(city_csv.read_bytes())
    try:
        assert main(["fit", pipe, *ARGS]) == 0
    finally:
        os.close(int(pipe.rsplit("/", 1)[1]))
    assert capsys.readouterr().out == expected


@pytest.mark.skipif(not Path("/dev/fd").is_dir(), reason="needs /dev/fd (Linux, macOS)")
def test_an_empty_pipe_is_a_clear_error(capsys):
    pipe = _through_a_pipe(b"")
    try:
        assert main(["fit", pipe, *ARGS]) == 2
    finally:
        os.close(int(pipe.rsplit("/", 1)[1]))
    assert f"{pipe!r} is empty: it has no header and no rows." in capsys.readouterr().err


def test_a_dash_reads_standard_input(city_csv, capsys, monkeypatch):
    capsys.readouterr()
    assert main(["fit", str(city_csv), *ARGS]) == 0
    expected = capsys.readouterr().out
    monkeypatch.setattr(sys, "stdin", io.TextIOWrapper(io.BytesIO(city_csv.read_bytes())))
    assert main(["fit", "-", *ARGS]) == 0
    assert capsys.readouterr().out == expected
