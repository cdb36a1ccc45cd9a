"""Cached grids and survey chunks are keyed by the engine version: numbers may not change
without it.

A fix that moves any number the engine produces must bump ``solver.ENGINE_VERSION`` (so caches
made before are not served) and store the new fingerprint (``python
tests/engine_fingerprint.py --write``).
"""

from __future__ import annotations

import engine_fingerprint
import pytest

from solver import ENGINE_VERSION


@pytest.mark.slow
def test_numbers_change_only_with_the_engine_version() -> None:
    saved = engine_fingerprint.stored()
    assert saved.get("engine_version") == ENGINE_VERSION, (
        f"ENGINE_VERSION is {ENGINE_VERSION} but the stored fingerprint is for "
        f"{saved.get('engine_version')}: run `python tests/engine_fingerprint.py --write`"
    )
    now = engine_fingerprint.compute()
    changed = sorted(
        k for k in set(now) | set(saved["digests"]) if now.get(k) != saved["digests"].get(k)
    )
    assert not changed, (
        "the engine's numbers changed without a new ENGINE_VERSION (bump it in "
        f"solver/__init__.py and store the fingerprint): {', '.join(changed)}"
    )
