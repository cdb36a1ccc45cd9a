"""Lazy public APIs for the subpackages: a name is imported from its module on first use.

Each subpackage lists its public names once, by module, as scipy's subpackages do; importing the
subpackage itself costs nothing, so a command that needs one module never pays for the compiled
kernels or scipy.optimize of another.
"""

from __future__ import annotations

import importlib
from collections.abc import Callable, Mapping, Sequence
from typing import Any


def lazy_api(
    package: str, api: Mapping[str, Sequence[str]]
) -> tuple[list[str], Callable[[str], Any], Callable[[], list[str]]]:
    """``(__all__, __getattr__, __dir__)`` for ``package`` from ``{module: [names]}``."""
    where = {name: module for module, names in api.items() for name in names}

    def __getattr__(name: str) -> Any:
        module = where.get(name)
        if module is None:
            raise AttributeError(f"module {package!r} has no attribute {name!r}")
        return getattr(importlib.import_module(f"{package}.{module}"), name)

    def __dir__() -> list[str]:
        return sorted(where)

    return sorted(where), __getattr__, __dir__


__all__ = ["lazy_api"]
