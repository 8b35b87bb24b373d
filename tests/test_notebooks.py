"""Every notebook's code cells run, in order, against the installed package."""

from __future__ import annotations

import json
from pathlib import Path

import matplotlib
import pytest

NOTEBOOKS = sorted((Path(__file__).resolve().parents[1] / "notebooks").glob("*.ipynb"))


@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.name)
def test_notebook_code_runs(path: Path) -> None:
    matplotlib.use("Agg")
    cells = json.loads(path.read_text(encoding="utf-8"))["cells"]
    namespace: dict[str, object] = {}
    for i, cell in enumerate(cells):
        if cell["cell_type"] == "code":
            code = "".join(cell["source"])
            exec(compile(code, f"{path.name}[cell {i}]", "exec"), namespace)
    assert namespace, "notebook has no code"
