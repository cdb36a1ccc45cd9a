"""Shared test configuration: seeded randomness and the path to reference data."""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
from hypothesis import settings

REFERENCE_DATA = Path(__file__).parent / "reference_data"
VALIDATION_RECORD = Path(__file__).resolve().parents[1] / "test-artifacts" / "validation.json"


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


class ValidationRecord:
    """What the checks against outside sources measured, for the validation report.

    A test calls ``validation.record(...)`` beside its assertion; at the end of the run the rows
    go to ``test-artifacts/validation.json``, from which ``python docs/make_docs.py
    --validation`` writes ``docs/validation.md``. Only passing checks are written (a row is kept
    when the test that recorded it passed).
    """

    def __init__(self) -> None:
        self.rows: list[dict] = []
        self._pending: dict[str, list[dict]] = {}

    def record(
        self,
        check: str,
        *,
        source: str,
        tag: str,
        measured: float,
        tolerance: float,
        unit: str = "",
        note: str = "",
        test: str = "",
    ) -> None:
        self._pending.setdefault(test, []).append(
            {
                "check": check,
                "source": source,
                "tag": tag,
                "measured": float(measured),
                "tolerance": float(tolerance),
                "unit": unit,
                "note": note,
                "test": test,
            }
        )

    def passed(self, test: str) -> None:
        self.rows.extend(self._pending.pop(test, []))


_VALIDATION = ValidationRecord()


@pytest.fixture
def validation(request):
    """Record one measured agreement with an outside source (see :class:`ValidationRecord`)."""
    test = request.node.nodeid

    class _Bound:
        def record(self, check: str, **kwargs) -> None:
            _VALIDATION.record(check, test=test, **kwargs)

    yield _Bound()
    report = getattr(request.node, "rep_call", None)
    if report is not None and report.passed:
        _VALIDATION.passed(test)


def pytest_sessionfinish(session, exitstatus) -> None:
    if not _VALIDATION.rows:
        return
    from solver import ENGINE_VERSION

    # A partial run updates the checks it ran and keeps the others of the last whole run.
    rows = {row["check"]: row for row in _VALIDATION.rows}
    if VALIDATION_RECORD.exists():
        try:
            old = json.loads(VALIDATION_RECORD.read_text())
        except ValueError:
            old = {}
        if old.get("engine_version") == ENGINE_VERSION:
            rows = {row["check"]: row for row in old.get("checks", [])} | rows
    VALIDATION_RECORD.parent.mkdir(parents=True, exist_ok=True)
    VALIDATION_RECORD.write_text(
        json.dumps({"engine_version": ENGINE_VERSION, "checks": list(rows.values())}, indent=1)
    )


# ---------------------------------------------------------------------------------------------
# The browser tests' shared fixtures (tests/browser_support.py holds what they wait for)


@pytest.fixture(scope="module")
def browser():
    """A headless Chromium (Debian's), one per test module, driven by Playwright."""
    from browser_support import CHROMIUM, CHROMIUM_ARGS

    sync_api = pytest.importorskip("playwright.sync_api")
    with sync_api.sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        yield b
        b.close()


@pytest.fixture
def tabs(browser, request):
    """Opens tabs; screenshots each on failure and fails on any browser console error."""
    from browser_support import tab_factory

    yield from tab_factory(browser, request)
