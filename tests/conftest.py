"""Shared test configuration: seeded randomness and the path to reference data."""

from __future__ import annotations

from pathlib import Path

import pytest

REFERENCE_DATA = Path(__file__).parent / "reference_data"


@pytest.fixture
def reference_data() -> Path:
    return REFERENCE_DATA


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item, call):
    """Keep each phase's report on the test item (fixtures read it to save failure artifacts)."""
    outcome = yield
    report = outcome.get_result()
    setattr(item, f"rep_{report.when}", report)
