"""Shared test configuration: seeded randomness and the path to reference data."""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from hypothesis import settings

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


# Property tests draw the same examples on every run by default, so that CI passes or fails on
# the code and not on the draw. `HYPOTHESIS_PROFILE=explore` draws fresh random examples on each
# run; run it a few times before a release and pin what it finds with @example.
settings.register_profile("repeatable", derandomize=True, print_blob=True)
settings.register_profile("explore", derandomize=False, print_blob=True)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "repeatable"))


# Fast tests first, then slow ones, then the browser tests: a quick failure is reported quickly.
# Code checks (lint, format, types) come first of all.
def _stage(item: pytest.Item) -> int:
    if item.path.name == "test_code_quality.py":
        return 0
    if item.get_closest_marker("browser"):
        return 3
    if item.get_closest_marker("slow"):
        return 2
    return 1


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    items.sort(key=_stage)  # stable: each stage keeps the files' own order
