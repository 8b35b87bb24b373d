"""The README and CI script agree, and the README example is real code."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _bash_blocks(text: str) -> list[str]:
    return re.findall(r"```bash\n(.*?)```", text, flags=re.S)


def test_ci_runs_the_readme_test_command() -> None:
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    test_commands = [b.strip() for b in _bash_blocks(readme) if "pytest" in b]
    assert test_commands, "README has no test command"
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert test_commands[0] in ci.splitlines()


def test_readme_demo_command_runs_the_demo() -> None:
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    assert any("airhealth demo" in b for b in _bash_blocks(readme))


def test_readme_first_paragraph_states_the_job() -> None:
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    first = readme.split("\n\n")[1]
    for phrase in ("air pollution", "relative risks per 10 µg/m³", "quasi-Poisson"):
        assert phrase in first.replace("\n", " ")


def test_readme_and_reports_carry_the_caution() -> None:
    from airhealth.report.document import CAUTION

    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    assert "not proof of causation" in readme
    assert "not proof of causation" in CAUTION


def test_readme_python_example_runs(tmp_path, monkeypatch) -> None:
    import matplotlib

    monkeypatch.chdir(tmp_path)  # the example writes a report folder: never into the repository

    matplotlib.use("Agg")
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```python\n(.*?)```", readme, flags=re.S)
    assert blocks, "README has no Python example"
    namespace: dict[str, object] = {}
    exec(compile(blocks[0], "README.md", "exec"), namespace)
    result = namespace["result"]
    assert 0.99 < result.effect(per=10).rr < 1.03  # the sample's true RR per 10 is 1.010
    assert (tmp_path / "my-report" / "index.html").is_file()


def _apt_packages(text: str) -> list[set[str]]:
    return [set(m.split()) for m in re.findall(r"apt-get install -y ([a-z0-9 .+-]+)", text)]


def test_docs_name_the_r_packages_ci_installs() -> None:
    ci = _apt_packages((ROOT / ".ci" / "run").read_text(encoding="utf-8"))
    assert len(ci) == 1 and {"r-base-core", "r-cran-sandwich"} <= ci[0]
    for doc in ("README.md", "DEVELOPERS.md"):
        named = _apt_packages((ROOT / doc).read_text(encoding="utf-8"))
        assert named == ci, f"{doc} and .ci/run install different R packages"
