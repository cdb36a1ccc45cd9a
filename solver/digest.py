"""Canonical digests: the one way arcwindow hashes what produced a result.

Cache entries, survey chunks and provenance all name their inputs by a SHA-256 over a canonical
JSON text, so equal inputs give equal keys whatever the order of keys, the container types or the
numpy scalar types used to build them.
"""

from __future__ import annotations

import hashlib
import json
import os
from collections.abc import Mapping
from typing import Any

import numpy as np

from solver.errors import InputError

_KEY_DOMAIN = "arcwindow.cache_key.v1\n"


def canonical_json(payload: Mapping[str, Any]) -> str:
    """The canonical JSON text that :func:`cache_key` hashes.

    Normalization rules:

    - mappings become JSON objects with keys sorted; keys must be strings;
    - lists and tuples become JSON arrays (a tuple and a list with the same items are equal);
    - numpy scalars become the matching Python ``bool``, ``int``, ``float`` or ``str``; numpy
      arrays become nested lists of their values (``ndarray.tolist()``), so an array hashes like
      the list of its values, whatever its dtype's byte order;
    - floats are written with ``repr`` (shortest text that round-trips, so different doubles never
      collide), ``-0.0`` stays distinct from ``0.0``, NaN and infinities become ``NaN``,
      ``Infinity``, ``-Infinity``; an integer ``1`` and a float ``1.0`` are different values
      (normalizing the case is the caller's job);
    - ``os.PathLike`` values become their path string;
    - anything else (sets, dates, objects) raises :class:`InputError`.

    Output is ASCII only (``ensure_ascii``) with no insignificant whitespace.

    Parameters
    ----------
    payload : Mapping[str, Any]
        The normalized case, ephemeris id and engine version.

    Returns
    -------
    str
        Canonical JSON text.
    """
    return json.dumps(
        _normalize(payload, "payload"),
        sort_keys=True,
        separators=(",", ":"),
        ensure_ascii=True,
        allow_nan=True,
    )


def cache_key(payload: Mapping[str, Any]) -> str:
    """SHA-256 key of a grid request.

    Parameters
    ----------
    payload : Mapping[str, Any]
        Everything that determines the grid: the normalized case, the ephemeris id and
        ``solver.ENGINE_VERSION``. Normalized as described in :func:`canonical_json`.

    Returns
    -------
    str
        64 lowercase hexadecimal characters (SHA-256 of a domain prefix and the canonical JSON).

    Raises
    ------
    InputError
        If the payload holds a value with no canonical form (a set, a date, an object) or a
        non-string mapping key.

    Examples
    --------
    >>> cache_key({"b": 1, "a": [1.5, None]}) == cache_key({"a": (1.5, None), "b": 1})
    True
    """
    if not isinstance(payload, Mapping):
        raise InputError("payload", type(payload).__name__, "a mapping of str to JSON-able values")
    text = _KEY_DOMAIN + canonical_json(payload)
    return hashlib.sha256(text.encode("ascii")).hexdigest()


def _normalize(value: Any, where: str) -> Any:
    if value is None or isinstance(value, bool | int | str):
        return value
    if isinstance(value, float):
        return float(value)  # drops float subclasses such as np.float64 to a plain float
    if isinstance(value, Mapping):
        out = {}
        for key, item in value.items():
            if not isinstance(key, str):
                raise InputError(f"{where} key", key, "string keys only")
            out[key] = _normalize(item, f"{where}[{key!r}]")
        return out
    if isinstance(value, list | tuple):
        return [_normalize(item, f"{where}[{i}]") for i, item in enumerate(value)]
    if isinstance(value, np.ndarray):
        if value.dtype.kind not in "biufU":
            raise InputError(where, f"array of {value.dtype}", "bool, integer, float or str")
        return _normalize(value.tolist(), where)
    if isinstance(value, np.generic):
        item = value.item()
        if not isinstance(item, bool | int | float | str | bytes):
            raise InputError(where, value, "bool, integer, float or text numpy scalars")
        if isinstance(item, bytes):
            raise InputError(where, value, "text as str, not bytes")
        return _normalize(item, where)
    if isinstance(value, os.PathLike):
        return os.fspath(value)
    raise InputError(
        where,
        type(value).__name__,
        "dict, list, tuple, str, int, float, bool, None, a path or a numpy scalar/array",
    )


__all__ = ["cache_key", "canonical_json"]
