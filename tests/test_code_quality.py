"""Lint, format and type checks, run first with the tests so CI and a local run agree.

ruff (configured in pyproject.toml) over the whole repository; mypy over solver/ (the numerical
core, where a wrong type is a wrong number).
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
BIN = Path(sys.executable).parent


def _run(*command: str) -> subprocess.CompletedProcess:
    tool = BIN / command[0]
    if not tool.exists():
        pytest.fail(f"{command[0]} is missing: install the test extra (pip install -e '.[test]')")
    return subprocess.run(
        [str(tool), *command[1:]], cwd=ROOT, capture_output=True, text=True, check=False
    )


def test_ruff_lint() -> None:
    result = _run("ruff", "check", "--no-cache", ".")
    assert result.returncode == 0, result.stdout[-4000:]


def test_ruff_format() -> None:
    result = _run("ruff", "format", "--check", "--no-cache", ".")
    assert result.returncode == 0, result.stdout[-4000:]


def test_mypy_on_the_solver() -> None:
    result = _run("mypy", "--no-incremental")
    assert result.returncode == 0, result.stdout[-4000:]
