"""The built-in sample cases and how a case argument is resolved (a path or a sample's name)."""

from __future__ import annotations

from pathlib import Path

from solver.errors import InputError
from solver.window.case import Case, load_case

SAMPLE_DIR = Path(__file__).resolve().parents[1] / "sample_cases"
SEQUENCE_SAMPLE_DIR = SAMPLE_DIR / "sequences"
"""Sample cases with a [sequence] section (``arcwindow sequence``); kept apart from the one-leg
samples, which every window tool and the dashboard's case picker list."""
DEFAULT_CASE = "tallis_rendezvous"


def sample_case_paths() -> list[Path]:
    """Every ``sample_cases/*.toml``, sorted by name."""
    return sorted(SAMPLE_DIR.glob("*.toml"))


def resolve_case_path(argument: str) -> Path:
    """A case file path, or the name of a sample case (with or without ``.toml``)."""
    path = Path(argument)
    if path.is_file():
        return path
    name = path.name.removesuffix(".toml")
    candidate = SAMPLE_DIR / f"{name}.toml"
    if candidate.is_file():
        return candidate
    names = ", ".join(p.stem for p in sample_case_paths())
    raise InputError("CASE", argument, f"a TOML case file or a sample case name: {names}")


def sequence_case_paths() -> list[Path]:
    """Every ``sample_cases/sequences/*.toml``, sorted by name."""
    return sorted(SEQUENCE_SAMPLE_DIR.glob("*.toml"))


def resolve_sequence_case_path(argument: str) -> Path:
    """A case file path, or the name of a sequence sample (or of a one-leg sample)."""
    path = Path(argument)
    if path.is_file():
        return path
    name = path.name.removesuffix(".toml")
    for folder in (SEQUENCE_SAMPLE_DIR, SAMPLE_DIR):
        candidate = folder / f"{name}.toml"
        if candidate.is_file():
            return candidate
    names = ", ".join(p.stem for p in (*sequence_case_paths(), *sample_case_paths()))
    raise InputError("CASE", argument, f"a TOML case file or a sample case name: {names}")


def load(argument: str) -> Case:
    """Load and validate a case given as a path or a sample name."""
    return load_case(resolve_case_path(argument))
