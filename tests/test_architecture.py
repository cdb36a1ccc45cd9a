"""The shape of the code: import contracts, no import cycles, no upward imports.

The contracts themselves are in pyproject.toml (``[tool.importlinter]``); this test runs them so
that CI fails on a broken one, and adds what import-linter's contracts do not say: no module of
the engine takes part in an import cycle, even inside one subpackage.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import grimp
import pytest

ROOT = Path(__file__).resolve().parents[1]


def test_import_contracts_are_kept() -> None:
    lint = Path(sys.executable).with_name("lint-imports")
    if not lint.exists():
        pytest.fail("lint-imports is missing: install the test extra (pip install -e '.[test]')")
    result = subprocess.run(
        [str(lint), "--no-cache"], cwd=ROOT, capture_output=True, text=True, check=False
    )
    assert result.returncode == 0, result.stdout[-3000:] + result.stderr[-2000:]


def test_no_module_of_the_engine_is_in_an_import_cycle() -> None:
    graph = grimp.build_graph("solver", cache_dir=None)
    cycles = []
    for module in sorted(graph.modules):
        for imported in graph.find_modules_directly_imported_by(module):
            if graph.chain_exists(importer=imported, imported=module):
                cycles.append(f"{module} <-> {imported}")
    assert not cycles, "import cycles:\n" + "\n".join(cycles)


def test_each_subpackage_lists_its_public_api() -> None:
    import importlib

    for name in ("mechanics", "ephemeris", "launch", "window", "sequence", "files", "survey"):
        package = importlib.import_module(f"solver.{name}")
        assert package.__all__, name
        for public in package.__all__:
            assert getattr(package, public) is not None, f"solver.{name}.{public}"
