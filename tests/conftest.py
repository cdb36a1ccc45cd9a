"""Shared test configuration: seeded randomness and the path to reference data."""

from __future__ import annotations

from pathlib import Path

import pytest

REFERENCE_DATA = Path(__file__).parent / "reference_data"


@pytest.fixture
def reference_data() -> Path:
    return REFERENCE_DATA
