"""The reference pages in docs/ are written from the code; they must be current."""

from __future__ import annotations

import contextlib
import importlib.util
import io
from pathlib import Path

import pytest

DOCS = Path(__file__).resolve().parents[1] / "docs"


def _make_docs():
    spec = importlib.util.spec_from_file_location("make_docs", DOCS / "make_docs.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.mark.parametrize("page", ["case-format.md", "cli.md"])
def test_generated_page_is_current(page: str) -> None:
    make = _make_docs()
    with contextlib.redirect_stdout(io.StringIO()):
        expected = make.PAGES[page]()
    assert (DOCS / page).read_text() == expected, f"run `python docs/make_docs.py` ({page})"


def test_every_setting_is_documented() -> None:
    from solver.window.settings import SETTINGS

    text = (DOCS / "case-format.md").read_text()
    for setting in SETTINGS:
        assert f"## [{setting.section}]" in text and f"`{setting.name}`" in text, setting.key
