"""Standing promises of the project: the README's quick start is what CI runs, and the
README opens with the job and carries the caution."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _quick_start_commands() -> list[str]:
    readme = (ROOT / "README.md").read_text()
    section = readme.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```bash\n(.+?)\n```", section)


def test_quick_start_has_exactly_two_commands_and_ci_runs_the_test_one():
    commands = _quick_start_commands()
    assert len(commands) == 2
    assert "arcwindow serve" in commands[0]
    assert "pytest" in commands[1]
    ci = (ROOT / ".ci" / "run").read_text()
    assert commands[1] in ci.splitlines()


def test_readme_opens_with_the_job_and_carries_the_caution():
    readme = (ROOT / "README.md").read_text()
    first = next(line for line in readme.splitlines() if line and not line.startswith("#"))
    assert len(first) > 200 and "Lambert" in first
    assert "Caution" in readme and "high-fidelity" in readme


def test_top_level_layout():
    for name in [
        "README.md",
        "DEVELOPERS.md",
        "pyproject.toml",
        "LICENSE",
        "app",
        "solver",
        "tests",
        "assets",
        "sample_cases",
        ".ci/run",
    ]:
        assert (ROOT / name).exists(), name
