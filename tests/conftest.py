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


def pytest_sessionstart(session):
    """On a machine that has not compiled the solver's kernels yet (a fresh clone), compile them
    first and say so, rather than let the first test sit silent for a minute or two."""
    from solver.mechanics.kernels import pending_kernels, prepare_kernels

    pending = pending_kernels()
    if not pending:
        return
    reporter = session.config.pluginmanager.get_plugin("terminalreporter")

    def say(text: str) -> None:
        if reporter is not None:
            reporter.write_line(text)
        else:
            print(text, flush=True)

    say(
        f"arcwindow: preparing the solver, once: compiling {len(pending)} kernels for this "
        "machine (up to a minute or two, once; later runs load them in under a second)"
    )
    prepare_kernels(
        lambda done, total, name: say(f"  [{done + 1}/{total}] {name}") if name else None
    )
    say("arcwindow: solver ready")


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
