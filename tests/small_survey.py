"""A small survey of the demo catalogue, written through the CLI, for the survey page's tests."""

from __future__ import annotations

from pathlib import Path

from app.cli import main


def write_small_survey(out: Path, targets: int) -> Path:
    """Survey the first ``targets`` demo bodies over 2031 (serially, 10-day coarse grid)."""
    argv = ["survey", "demo_catalogue", "--case", "survey_base", "--years", "2031-2031"]
    argv += ["--out", str(out), "--first", str(targets), "--workers", "0"]
    argv += ["--coarse-step-days", "10", "--quiet"]
    assert main(argv) == 0
    return out
