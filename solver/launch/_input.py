"""Checks shared by the parsers of arrays of tables (vehicles, propulsion systems).

Scalar case settings are described in ``solver.window.settings``; arrays of tables have parsers
of their own next to their physics, and every error names the full key
(``vehicles[2].performance[3].c3_km2_s2``), counted from 1 as a reader counts tables.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from solver.errors import InputError


def table(key: str, value: Any, what: str) -> Mapping[str, Any]:
    """``value`` as a table, or InputError naming ``key``."""
    if not isinstance(value, Mapping):
        raise InputError(key, value, what)
    return value


def array_of_tables(key: str, value: Any, what: str) -> list[Mapping[str, Any]]:
    """``value`` as a list of tables, or InputError naming ``key`` (or the bad entry)."""
    if not isinstance(value, list):
        raise InputError(key, value, what)
    for index, entry in enumerate(value, start=1):
        table(f"{key}[{index}]", entry, what)
    return value


def known_keys(key: str, entry: Mapping[str, Any], allowed: frozenset[str]) -> None:
    """Refuse a misspelt key, naming it and the keys accepted."""
    unknown = sorted(set(entry) - allowed)
    if unknown:
        raise InputError(
            f"{key}.{unknown[0]}", entry[unknown[0]], "a known key: " + ", ".join(sorted(allowed))
        )


def number(
    key: str,
    value: Any,
    *,
    low: float | None = None,
    high: float | None = None,
    low_open: bool = False,
    unit: str = "",
) -> float:
    """A finite number within bounds (``low`` exclusive when ``low_open``), or InputError."""
    lo, hi = _g(low), _g(high)
    accepted = (
        f"a number {'above' if low_open else 'from'} {lo} {'and up to' if low_open else 'to'} {hi}"
    )
    accepted += f" {unit}" if unit else ""
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise InputError(key, value, accepted)
    x = float(value)
    if not math.isfinite(x):
        raise InputError(key, value, accepted)
    if low is not None and (x <= low if low_open else x < low):
        raise InputError(key, value, accepted)
    if high is not None and x > high:
        raise InputError(key, value, accepted)
    return x


def _g(value: float | None) -> str:
    if value is None:
        return "any"
    if float(value).is_integer() and abs(value) >= 1e4:
        return f"{int(value)}"  # 10000000, not 1e+07
    return f"{value:g}"


def text(key: str, value: Any) -> str:
    """A non-empty string, stripped, or InputError."""
    if not isinstance(value, str) or not value.strip():
        raise InputError(key, value, "a non-empty string")
    return value.strip()


def required(key: str, entry: Mapping[str, Any], name: str, what: str) -> Any:
    """``entry[name]``, or InputError naming ``key.name`` as missing."""
    if name not in entry:
        raise InputError(f"{key}.{name}", "(missing)", what)
    return entry[name]
