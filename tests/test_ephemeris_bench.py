"""The ephemeris benchmark section runs and reports ratios (no timing assertions)."""

from __future__ import annotations

from app.bench import SECTIONS, run_sections


def test_quick_ephemeris_section_runs():
    assert "ephemeris" in SECTIONS
    lines = run_sections(["ephemeris"], size="quick")
    assert len(lines) == 4
    for line in lines:
        assert line.section == "ephemeris"
        assert line.value > 0 and line.baseline_value > 0 and line.ratio > 0
