"""CCSDS Orbit Ephemeris Message (OEM) writer: version 2.0, keyword = value notation (KVN).

The open standard is CCSDS 502.0-B-2, *Orbit Data Messages* (2009); the rules applied here were
checked against the text of its successor 502.0-B-3 (2023), whose OEM 2.0-compatible parts are
unchanged (a copy of the text was read; section numbers below are from it):

- one header (``CCSDS_OEM_VERS``, ``CREATION_DATE`` in UTC, ``ORIGINATOR``), one metadata block
  between ``META_START`` and ``META_STOP`` with keywords in the order of table 5-3, then one data
  line per state ``epoch x y z x_dot y_dot z_dot`` in km and km/s, units not shown (5.2, 7.7.2);
- comments only right after ``CCSDS_OEM_VERS``, right after ``META_START`` or at the start of
  the data (7.8.9); every comment line starts with ``COMMENT`` and a space (7.8.5);
- lines at most 254 characters of printable ASCII, no tabs (7.3.2, 7.3.4);
- epochs ``YYYY-MM-DDThh:mm:ss[.d...]`` with leading zeros; seconds ``60`` only during a leap
  second (7.5.10);
- floating-point values with a mantissa of at most 16 digits (7.5.7); data lines here use
  ``%.15e`` (16 significant digits), so positions round-trip within 0.5 mm below 1e10 km
  (67 au) and velocities within 5e-14 km/s below 1000 km/s.

Epochs are given as already-formatted strings in the message's time system, so this module does
not convert time scales: the caller formats them (for example with the project's time module).
"""

from __future__ import annotations

import math
import os
import re
import textwrap
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC, date, datetime
from pathlib import Path

import numpy as np
from numpy.typing import ArrayLike, NDArray

from solver import ENGINE_VERSION
from solver.caution import CAUTION_ASCII_LINES
from solver.errors import InputError

OEM_VERSION = "2.0"

TIME_SYSTEMS: tuple[str, ...] = ("GPS", "TAI", "TCB", "TCG", "TDB", "TT", "UT1", "UTC")
"""Accepted ``TIME_SYSTEM`` values: the standard's list (502.0-B-3 3.2.3.2) minus the ones that
are not calendar time scales (GMST, MET, MRT, SCLK need an interface control document)."""

REF_FRAMES: tuple[str, ...] = (
    "EME2000",
    "GCRF",
    "GRC",
    "ICRF",
    "ITRF2000",
    "ITRF-93",
    "ITRF-97",
    "MCI",
    "TDR",
    "TOD",
)
"""Accepted ``REF_FRAME`` values: the standard's list (502.0-B-3 3.2.3.3) minus TEME, which it
reserves for mean-element messages. Heliocentric arcs from arcwindow are ICRF or EME2000."""

INTERPOLATIONS: tuple[str, ...] = ("HERMITE", "LAGRANGE", "LINEAR")

CAUTION_COMMENTS: tuple[str, ...] = CAUTION_ASCII_LINES
"""Written at the top of every message, before the caller's comments."""

MAX_LINE_CHARS = 254
_COMMENT_PREFIX = "COMMENT "
_EPOCH_RE = re.compile(r"(\d{4})-(\d{2})-(\d{2})T(\d{2}):(\d{2}):(\d{2})(?:\.(\d{1,14}))?")
_EPOCH_ACCEPTED = "'YYYY-MM-DDThh:mm:ss[.ffffff]' (up to 14 decimals), e.g. 2031-05-01T12:00:00"


def format_oem(
    epochs: Sequence[str],
    r_km: ArrayLike,
    v_km_s: ArrayLike,
    *,
    object_name: str,
    object_id: str,
    center_name: str,
    ref_frame: str,
    time_system: str,
    originator: str,
    comments: Sequence[str] = (),
    creation_date_utc: str | datetime | None = None,
    useable_start_time: str | None = None,
    useable_stop_time: str | None = None,
    interpolation: str | None = None,
    interpolation_degree: int | None = None,
) -> str:
    """Text of a one-segment CCSDS OEM 2.0 (KVN) for a sampled arc.

    Parameters
    ----------
    epochs : sequence of str, length n
        Epochs in ``time_system``, ISO 8601 ``YYYY-MM-DDThh:mm:ss[.ffffff]``, strictly
        increasing. Written as given.
    r_km : array_like, shape (n, 3)
        Positions relative to ``center_name`` in ``ref_frame``, km.
    v_km_s : array_like, shape (n, 3)
        Velocities, km/s.
    object_name, object_id : str
        The object; the standard recommends the international designator for ``object_id``
        and ``UNKNOWN`` when there is none.
    center_name : str
        Origin of the frame, e.g. ``SUN``, ``EARTH``, ``SOLAR SYSTEM BARYCENTER``.
    ref_frame : str
        One of :data:`REF_FRAMES` (case-insensitive).
    time_system : str
        One of :data:`TIME_SYSTEMS` (case-insensitive), the scale of every epoch.
    originator : str
        Creating agency or operator.
    comments : sequence of str
        Provenance lines (ephemeris, constants, engine version, case hash...). A string may hold
        several lines separated by newlines; lines longer than the 254-character limit are
        wrapped at spaces. Printable ASCII only. Written after :data:`CAUTION_COMMENTS`.
    creation_date_utc : str or datetime or None
        ``CREATION_DATE``: an ISO string in UTC, a timezone-aware datetime, or ``None`` for now.
    useable_start_time, useable_stop_time : str or None
        Optional useable span, both or neither, within the data span.
    interpolation : str or None
        Recommended method, one of :data:`INTERPOLATIONS`; needs ``interpolation_degree``.
    interpolation_degree : int or None
        Recommended degree; the data must hold enough states for it.

    Returns
    -------
    str
        The message, lines ending in ``\\n``.

    Raises
    ------
    InputError
        Naming the field, the value and what is accepted: mismatched lengths or shapes,
        non-increasing or malformed epochs, non-finite states, unknown time system, frame or
        interpolation, text that is not printable ASCII or too long for a line.

    Examples
    --------
    >>> text = format_oem(
    ...     ["2031-05-01T00:00:00.000000", "2031-05-02T00:00:00.000000"],
    ...     [[1.4e8, 0.0, 0.0], [1.4e8, 2.6e6, 0.0]],
    ...     [[0.0, 30.0, 0.0], [-0.6, 30.0, 0.0]],
    ...     object_name="PATHFINDER DEMO", object_id="UNKNOWN", center_name="SUN",
    ...     ref_frame="ICRF", time_system="TDB", originator="ARCWINDOW",
    ...     creation_date_utc="2030-01-01T00:00:00",
    ... )
    >>> text.splitlines()[0]
    'CCSDS_OEM_VERS = 2.0'
    """
    header_lines = _header_lines(originator, comments, creation_date_utc)
    segment_lines = _segment_lines(
        OemSegment(
            epochs=epochs,
            r_km=r_km,
            v_km_s=v_km_s,
            object_name=object_name,
            object_id=object_id,
            center_name=center_name,
            ref_frame=ref_frame,
            time_system=time_system,
            useable_start_time=useable_start_time,
            useable_stop_time=useable_stop_time,
            interpolation=interpolation,
            interpolation_degree=interpolation_degree,
        ),
        "",
    )
    return "\n".join([*header_lines, *segment_lines]) + "\n"


@dataclass(frozen=True)
class OemSegment:
    """One segment of a message: metadata and states (see :func:`format_oem` for each field).

    ``comments`` are written right after ``META_START`` (502.0-B-3 7.8.9).
    """

    epochs: Sequence[str]
    r_km: ArrayLike
    v_km_s: ArrayLike
    object_name: str
    object_id: str
    center_name: str
    ref_frame: str
    time_system: str
    comments: Sequence[str] = ()
    useable_start_time: str | None = None
    useable_stop_time: str | None = None
    interpolation: str | None = None
    interpolation_degree: int | None = None


def format_oem_segments(
    segments: Sequence[OemSegment],
    *,
    originator: str,
    comments: Sequence[str] = (),
    creation_date_utc: str | datetime | None = None,
) -> str:
    """Text of a CCSDS OEM 2.0 (KVN) with several segments (one per leg of a sequence).

    One header, then each segment's metadata and data in turn. Each segment's epochs increase;
    a segment may start where the previous one stopped (a flyby joins two legs at one epoch)
    but not before it. Errors name the segment (``segments[2].epochs[0]``).
    """
    if isinstance(segments, OemSegment) or not segments:
        raise InputError("segments", segments, "one or more OemSegment")
    lines = _header_lines(originator, comments, creation_date_utc)
    previous_stop = None
    for index, segment in enumerate(segments):
        where = f"segments[{index}]."
        lines.extend(_segment_lines(segment, where))
        time_system = _choice(where + "time_system", segment.time_system, TIME_SYSTEMS)
        first = _epoch_key(where + "epochs[0]", segment.epochs[0], time_system)
        if previous_stop is not None and first < previous_stop:
            raise InputError(
                where + "epochs[0]",
                segment.epochs[0],
                "no earlier than the previous segment's STOP_TIME (segments in time order)",
            )
        previous_stop = _epoch_key(where + "epochs[-1]", segment.epochs[-1], time_system)
    return "\n".join(lines) + "\n"


def _header_lines(
    originator: str, comments: Sequence[str], creation_date_utc: str | datetime | None
) -> list[str]:
    own_comments = [*CAUTION_COMMENTS, f"Generated by arcwindow {ENGINE_VERSION}."]
    return [
        f"CCSDS_OEM_VERS = {OEM_VERSION}",
        *_comment_lines(own_comments, "caution"),
        *_comment_lines(comments, "comments"),
        f"CREATION_DATE = {_creation_date(creation_date_utc)}",
        _kvn("ORIGINATOR", originator, "originator"),
    ]


def _segment_lines(segment: OemSegment, where: str) -> list[str]:
    """A blank line, the metadata block, a blank line, the data lines of one segment."""
    time_system = _choice(where + "time_system", segment.time_system, TIME_SYSTEMS)
    ref_frame = _choice(where + "ref_frame", segment.ref_frame, REF_FRAMES)
    epoch_list, epoch_keys = _check_epochs(segment.epochs, time_system, where)
    n = len(epoch_list)
    r = _check_states(where + "r_km", segment.r_km, n, "km")
    v = _check_states(where + "v_km_s", segment.v_km_s, n, "km/s")
    meta_lines = [
        "META_START",
        *_comment_lines(segment.comments, where + "comments"),
        _kvn("OBJECT_NAME", segment.object_name, where + "object_name"),
        _kvn("OBJECT_ID", segment.object_id, where + "object_id"),
        _kvn("CENTER_NAME", segment.center_name, where + "center_name"),
        f"REF_FRAME = {ref_frame}",
        f"TIME_SYSTEM = {time_system}",
        f"START_TIME = {epoch_list[0]}",
        *_useable_lines(
            segment.useable_start_time,
            segment.useable_stop_time,
            epoch_keys[0],
            epoch_keys[-1],
            time_system,
        ),
        f"STOP_TIME = {epoch_list[-1]}",
        *_interpolation_lines(segment.interpolation, segment.interpolation_degree, n),
        "META_STOP",
    ]
    data_lines = [
        f"{epoch} {x: .15e} {y: .15e} {z: .15e} {vx: .15e} {vy: .15e} {vz: .15e}"
        for epoch, (x, y, z), (vx, vy, vz) in zip(epoch_list, r.tolist(), v.tolist(), strict=True)
    ]
    # Data lines are at most 34 + 6 * 24 = 178 characters; text fields were checked above.
    return ["", *meta_lines, "", *data_lines]


def write_oem(
    path: str | os.PathLike[str],
    epochs: Sequence[str],
    r_km: ArrayLike,
    v_km_s: ArrayLike,
    *,
    object_name: str,
    object_id: str,
    center_name: str,
    ref_frame: str,
    time_system: str,
    originator: str,
    comments: Sequence[str] = (),
    creation_date_utc: str | datetime | None = None,
    useable_start_time: str | None = None,
    useable_stop_time: str | None = None,
    interpolation: str | None = None,
    interpolation_degree: int | None = None,
) -> Path:
    """Write :func:`format_oem`'s message to ``path`` (ASCII, ``\\n`` line ends), atomically and
    with its SHA-256 beside it (``NAME.sha256``, see :mod:`solver.files.atomic`).

    Parameters
    ----------
    path : str or os.PathLike
        Output file; its folder must exist. Nothing is written if an input is rejected.
    epochs, r_km, v_km_s, object_name, ..., interpolation_degree
        As for :func:`format_oem`.

    Returns
    -------
    pathlib.Path
        The written file.
    """
    text = format_oem(
        epochs,
        r_km,
        v_km_s,
        object_name=object_name,
        object_id=object_id,
        center_name=center_name,
        ref_frame=ref_frame,
        time_system=time_system,
        originator=originator,
        comments=comments,
        creation_date_utc=creation_date_utc,
        useable_start_time=useable_start_time,
        useable_stop_time=useable_stop_time,
        interpolation=interpolation,
        interpolation_degree=interpolation_degree,
    )
    from solver.files.atomic import write_bytes_atomic

    return write_bytes_atomic(path, text.encode("ascii"), checksum=True)


# --------------------------------------------------------------------------------------------
# Validation helpers


def _choice(field: str, value: str, accepted: tuple[str, ...]) -> str:
    normalized = value.strip().upper() if isinstance(value, str) else value
    if normalized not in accepted:
        raise InputError(field, value, "one of " + ", ".join(accepted))
    return normalized


def _epoch_key(field: str, text: str, time_system: str) -> tuple[int, int, int, int, int]:
    """Sortable exact key of an epoch string; raises InputError if it is not a valid epoch."""
    match = _EPOCH_RE.fullmatch(text) if isinstance(text, str) else None
    if match is None:
        raise InputError(field, text, _EPOCH_ACCEPTED)
    year, month, day, hour, minute, second = (int(part) for part in match.groups()[:6])
    fraction = match.group(7) or ""
    try:
        ordinal = date(year, month, day).toordinal()
    except ValueError:
        raise InputError(field, text, "a real calendar date, " + _EPOCH_ACCEPTED) from None
    leap_second = time_system == "UTC" and (hour, minute, second) == (23, 59, 60)
    if hour > 23 or minute > 59 or (second > 59 and not leap_second):
        accepted = "hh <= 23, mm <= 59, ss <= 59 (ss = 60 only at 23:59 UTC, a leap second)"
        raise InputError(field, text, accepted)
    return (ordinal, hour, minute, second, int(fraction.ljust(14, "0")))


def _check_epochs(
    epochs: Sequence[str], time_system: str, where: str = ""
) -> tuple[list[str], list[tuple[int, int, int, int, int]]]:
    if isinstance(epochs, str) or not isinstance(epochs, Sequence | np.ndarray):
        raise InputError(where + "epochs", epochs, "a sequence of ISO 8601 epoch strings")
    epoch_list = [str(e) if isinstance(e, np.str_) else e for e in epochs]
    if not epoch_list:
        raise InputError(where + "epochs", epoch_list, "at least one epoch")
    keys = [
        _epoch_key(f"{where}epochs[{i}]", text, time_system) for i, text in enumerate(epoch_list)
    ]
    for i in range(1, len(keys)):
        if keys[i] <= keys[i - 1]:
            raise InputError(
                f"{where}epochs[{i}]",
                epoch_list[i],
                f"strictly later than epochs[{i - 1}] = {epoch_list[i - 1]} (increasing epochs)",
            )
    return epoch_list, keys


def _check_states(field: str, values: ArrayLike, n: int, unit: str) -> NDArray[np.float64]:
    try:
        array = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise InputError(field, values, f"an (n, 3) array of numbers, {unit}") from None
    if array.shape != (n, 3):
        raise InputError(f"{field}.shape", array.shape, f"({n}, 3), one row per epoch")
    finite = np.isfinite(array).all(axis=1)
    if not finite.all():
        row = int(np.argmin(finite))
        raise InputError(f"{field}[{row}]", array[row].tolist(), f"finite numbers, {unit}")
    return array


def _check_text(field: str, value: str, max_chars: int) -> str:
    if not isinstance(value, str):
        raise InputError(field, value, "text")
    text = value.strip()
    if not text:
        raise InputError(field, value, "non-empty text")
    if not all(" " <= char <= "~" for char in text):
        raise InputError(field, value, "printable ASCII characters only (no tabs or newlines)")
    if len(text) > max_chars:
        raise InputError(field, value, f"at most {max_chars} characters")
    return text


def _kvn(keyword: str, value: str, field: str) -> str:
    prefix = f"{keyword} = "
    return prefix + _check_text(field, value, MAX_LINE_CHARS - len(prefix))


def _comment_lines(comments: Sequence[str], field: str) -> list[str]:
    if isinstance(comments, str) or not isinstance(comments, Sequence):
        raise InputError(field, comments, "a list of strings")
    width = MAX_LINE_CHARS - len(_COMMENT_PREFIX)
    lines: list[str] = []
    for index, comment in enumerate(comments):
        if not isinstance(comment, str):
            raise InputError(f"{field}[{index}]", comment, "text")
        for line in comment.splitlines() or [""]:
            if not all(" " <= char <= "~" for char in line):
                raise InputError(f"{field}[{index}]", comment, "printable ASCII text, no tabs")
            pieces = textwrap.wrap(line, width, break_long_words=True, break_on_hyphens=False)
            lines.extend(_COMMENT_PREFIX + piece for piece in pieces or [""])
    return lines


def _creation_date(value: str | datetime | None) -> str:
    if value is None:
        value = datetime.now(UTC)
    if isinstance(value, datetime):
        if value.tzinfo is None or value.utcoffset() is None:
            raise InputError("creation_date_utc", value, "a timezone-aware datetime or a string")
        utc = value.astimezone(UTC)
        text = utc.strftime("%Y-%m-%dT%H:%M:%S")
        return text + (f".{utc.microsecond:06d}" if utc.microsecond else "")
    _epoch_key("creation_date_utc", value, "UTC")
    return value


def _useable_lines(
    start: str | None, stop: str | None, first: tuple, last: tuple, time_system: str
) -> list[str]:
    if start is None and stop is None:
        return []
    if start is None or stop is None:
        missing = "useable_start_time" if start is None else "useable_stop_time"
        raise InputError(missing, None, "given together with its partner, or both omitted")
    start_key = _epoch_key("useable_start_time", start, time_system)
    stop_key = _epoch_key("useable_stop_time", stop, time_system)
    if not first <= start_key <= stop_key <= last:
        raise InputError(
            "useable_start_time, useable_stop_time",
            (start, stop),
            "START_TIME <= useable start <= useable stop <= STOP_TIME",
        )
    return [f"USEABLE_START_TIME = {start}", f"USEABLE_STOP_TIME = {stop}"]


def _interpolation_lines(method: str | None, degree: int | None, n: int) -> list[str]:
    if method is None:
        if degree is not None:
            raise InputError("interpolation_degree", degree, "only together with interpolation")
        return []
    method = _choice("interpolation", method, INTERPOLATIONS)
    if isinstance(degree, bool) or not isinstance(degree, int | np.integer) or degree < 1:
        raise InputError("interpolation_degree", degree, f"an integer >= 1 for {method}")
    degree = int(degree)
    # States needed for the stated method: Lagrange fits degree + 1 positions; Hermite uses
    # position and velocity at each state, so a degree-d fit needs ceil((d + 1) / 2) states.
    needed = {"LINEAR": 2, "LAGRANGE": degree + 1, "HERMITE": math.ceil((degree + 1) / 2)}[method]
    if method == "LINEAR" and degree != 1:
        raise InputError("interpolation_degree", degree, "1 for LINEAR")
    if n < needed:
        raise InputError("interpolation_degree", degree, f"a degree that {n} states support")
    return [f"INTERPOLATION = {method}", f"INTERPOLATION_DEGREE = {degree}"]


__all__ = [
    "CAUTION_COMMENTS",
    "INTERPOLATIONS",
    "MAX_LINE_CHARS",
    "OEM_VERSION",
    "REF_FRAMES",
    "TIME_SYSTEMS",
    "OemSegment",
    "format_oem",
    "format_oem_segments",
    "write_oem",
]
