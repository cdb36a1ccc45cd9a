"""The caution every screen, print-out and file of arcwindow carries, worded once."""

from __future__ import annotations

CAUTION = (
    "Two-body, patched-conic preliminary design: confirm with high-fidelity tools and the "
    "responsible mission authority before committing hardware or launch plans."
)
"""The sentence shown on every page, printed by every command and written into every export."""

CAUTION_ASCII_LINES: tuple[str, ...] = (
    "CAUTION: two-body, patched-conic preliminary design. Confirm with high-fidelity tools",
    "and the responsible mission authority before committing hardware or launch plans.",
)
"""The same sentence as printable ASCII lines of at most 90 characters, for file formats whose
comments are restricted (CCSDS OEM ``COMMENT`` lines)."""

__all__ = ["CAUTION", "CAUTION_ASCII_LINES"]
