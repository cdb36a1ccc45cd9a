"""UTC <-> TDB Julian dates, vectorized, with leap seconds from pyerfa.

Time scales
-----------
* UTC strings are ISO 8601 dates or date-times: ``2026-05-01``, ``2026-05-01T12:00``,
  ``2026-05-01T12:00:00``, ``2026-05-01T12:00:00.250Z`` (a space may replace ``T``; a trailing
  ``Z`` or ``+00:00`` is optional; a leap second is written ``23:59:60.x`` on the days that have
  one).
* UTC -> TAI uses the leap-second table bundled with pyerfa (``erfa.dat``; the 1960-1972
  "rubber second" drift rates are included). TAI -> TT adds 32.184 s. TT -> TDB adds the periodic
  term of ``erfa.dtdb`` (Fairhead & Bretagnon series, up to ~1.7 ms) for a geocentric observer.
* **Future dates** assume no leap second after the last one in the table (TAI-UTC = 37 s since
  2017-01-01 at the time of writing; :data:`LAST_LEAP_SECOND_UTC`). A leap second announced later
  would move every later UTC time by 1 s relative to TDB. :data:`FUTURE_UTC_NOTE` is the sentence
  for the dashboard and CLI to show where dates are entered.
* **Dates before 1960**: UTC did not exist; ERFA then takes TAI-UTC = 0, so such dates are read
  as TAI (about 30 s from UT at the time). This only matters for the historical end of DE423.

ERFA flags both cases as a "dubious year" warning; we call the raw ``erfa.ufunc`` functions, which
return that status instead of emitting a Python warning, and ignore only that status, so no
warning filter (a process-global, thread-unsafe setting) is touched.

Representation
--------------
The engine carries epochs as a single float64 Julian date in TDB (``jd_tdb``). Near J2000 one
float64 JD step is 4.7e-10 day = 40 microseconds, so a date is held to about 20 microseconds;
at the 30-50 km/s of planets that is under 1 m, far below anything a two-body design resolves.
Conversions themselves run on two-part dates (``jd1`` day part, ``jd2`` fraction), accurate to
nanoseconds; pass ``split=True`` to get the pair, e.g. to compare with another time library to
1 microsecond.
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from typing import Literal, overload

import erfa
import numpy as np
from numpy.typing import ArrayLike, NDArray

from solver.errors import InputError
from solver.time_units import MINUTES_PER_DAY as _MINUTES_PER_DAY
from solver.time_units import SECONDS_PER_DAY as _SECONDS_PER_DAY

ISO_UTC_ACCEPTED = (
    "an ISO 8601 UTC date or date-time such as '2026-05-01', '2026-05-01T12:00' or "
    "'2026-05-01T12:00:00.5Z'"
)

_ISO_RE = re.compile(
    r"^\s*(\d{4})-(\d{1,2})-(\d{1,2})"
    r"(?:[Tt ](\d{1,2}):(\d{2})(?::(\d{2}(?:\.\d*)?))?)?"
    r"\s*(?:[Zz]|\+00:?00)?\s*$"
)

_TT_MINUS_TAI_S = 32.184  # exact by definition (IAU 1991)


def _last_leap_second() -> tuple[str, float]:
    table = erfa.leap_seconds.get()
    year, month, tai_minus_utc = table[-1]
    return f"{int(year):04d}-{int(month):02d}-01", float(tai_minus_utc)


LAST_LEAP_SECOND_UTC, TAI_MINUS_UTC_LATEST_S = _last_leap_second()
"""UTC date from which the last leap second in pyerfa's table applies, and TAI-UTC from then."""

FUTURE_UTC_NOTE = (
    f"UTC dates after {LAST_LEAP_SECOND_UTC} assume no further leap seconds "
    f"(TAI-UTC = {TAI_MINUS_UTC_LATEST_S:g} s); a leap second announced later would shift "
    "them by 1 s."
)
"""One sentence for the dashboard and CLI to show beside date inputs."""


# ---------------------------------------------------------------------------------------------
# Parsing
# ---------------------------------------------------------------------------------------------
def _as_string_array(utc: str | Iterable[str] | ArrayLike, field: str) -> NDArray[np.object_]:
    arr = np.asarray(utc, dtype=object)
    for item in arr.flat:
        if not isinstance(item, str):
            raise InputError(field, item, ISO_UTC_ACCEPTED)
    return arr


def parse_iso_utc(
    utc: str | Iterable[str] | ArrayLike, field: str = "utc"
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Parse ISO 8601 UTC strings into two-part UTC quasi-Julian dates (ERFA's convention).

    Parameters
    ----------
    utc : str or array_like of str
        Dates or date-times, see the module docstring for the accepted forms.
    field : str
        Field name used in error messages.

    Returns
    -------
    jd1_utc, jd2_utc : ndarray
        Day part (midnight, ``.5``) and fraction of day, each with the shape of ``utc``.

    Raises
    ------
    InputError
        For the first string that is not an accepted form or not a real calendar date/time
        (the message names the field and the string).
    """
    arr = _as_string_array(utc, field)
    shape = arr.shape
    flat = arr.reshape(-1)
    n = flat.size
    year = np.empty(n, dtype=np.int32)
    month = np.empty(n, dtype=np.int32)
    day = np.empty(n, dtype=np.int32)
    hour = np.zeros(n, dtype=np.int32)
    minute = np.zeros(n, dtype=np.int32)
    second = np.zeros(n, dtype=np.float64)
    match = _ISO_RE.match
    for k, text in enumerate(flat):
        m = match(text)
        if m is None:
            raise InputError(field, text, ISO_UTC_ACCEPTED)
        y, mo, d, h, mi, s = m.groups()
        year[k] = int(y)
        month[k] = int(mo)
        day[k] = int(d)
        if h is not None:
            hour[k] = int(h)
            minute[k] = int(mi)
            if s is not None:
                second[k] = float(s)
    jd1, jd2, status = erfa.ufunc.dtf2d("UTC", year, month, day, hour, minute, second)
    # A leap second is only 23:59:60.x; ERFA alone would accept 60 s in any minute of that day.
    bad = (status < 0) | (status >= 2) | ((second >= 60.0) & ((hour != 23) | (minute != 59)))
    if bad.any():
        k = int(np.flatnonzero(bad)[0])
        reason = {
            -1: "year out of range",
            -2: "month 1-12",
            -3: "day within the month",
            -4: "hour 0-23",
            -5: "minute 0-59",
            -6: "seconds >= 0",
        }.get(int(status[k]), "seconds below 60, or 23:59:60.x on a leap-second day")
        raise InputError(field, flat[k], f"{ISO_UTC_ACCEPTED} ({reason})")
    return jd1.reshape(shape), jd2.reshape(shape)


# ---------------------------------------------------------------------------------------------
# Two-part conversions
# ---------------------------------------------------------------------------------------------
def utc_jd_to_tt_jd(
    jd1_utc: ArrayLike, jd2_utc: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Two-part UTC quasi-JD to two-part TT JD (TT - UTC = TAI - UTC + 32.184 s).

    The day part is kept as given, so differences of TT dates taken part by part are exact to
    ~1e-16 day: the elapsed time between two UTC instants, leap seconds included.
    """
    tai1, tai2, _ = erfa.ufunc.utctai(jd1_utc, jd2_utc)  # status 1 = dubious year: accepted
    tt1, tt2, _ = erfa.ufunc.taitt(tai1, tai2)
    return tt1, tt2


def tt_jd_to_tdb_jd(
    jd1_tt: ArrayLike, jd2_tt: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Two-part TT JD to two-part TDB JD (the periodic TDB - TT term at the geocentre)."""
    dtdb_s = erfa.ufunc.dtdb(jd1_tt, jd2_tt, 0.0, 0.0, 0.0, 0.0)  # topocentric terms zero
    tdb1, tdb2, _ = erfa.ufunc.tttdb(jd1_tt, jd2_tt, dtdb_s)
    return tdb1, tdb2


def utc_jd_to_tdb_jd(
    jd1_utc: ArrayLike, jd2_utc: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Two-part UTC quasi-JD (as from :func:`parse_iso_utc`) to two-part TDB JD."""
    return tt_jd_to_tdb_jd(*utc_jd_to_tt_jd(jd1_utc, jd2_utc))


def add_days(
    jd1: ArrayLike, jd2: ArrayLike, days: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """A two-part date plus ``days``, renormalized: day part at midnight (``.5``), fraction in
    [0, 1). On a UTC quasi-JD this is UTC calendar arithmetic: whole days land on the same time
    of day (a leap-second day counts as one day)."""
    day1 = np.asarray(jd1, dtype=float)
    fraction = np.asarray(jd2, dtype=float) + np.asarray(days, dtype=float)
    whole = np.floor(fraction)
    return day1 + whole, fraction - whole


def elapsed_days(departure_jd_tdb: ArrayLike, arrival_jd_tdb: ArrayLike) -> NDArray[np.float64]:
    """Elapsed time between two instants given in TDB, in days of 86400 SI seconds on the geoid.

    This is the TT (= TAI) difference, which is what a clock on the ground counts between the
    two UTC instants, leap seconds included. It differs from the TDB difference by the periodic
    TDB - TT term at each end (at most ~3.4 ms). Float64 Julian dates limit it to about 40
    microseconds; grid nodes take it from their two-part dates instead
    (``solver.window.dates``).
    """
    dep1, dep2 = split_jd(departure_jd_tdb)
    arr1, arr2 = split_jd(arrival_jd_tdb)
    # TDB - TT evaluated at TDB instead of TT: the argument differs by < 2 ms, the term by ~1e-12 s.
    d_dep = erfa.ufunc.dtdb(dep1, dep2, 0.0, 0.0, 0.0, 0.0)
    d_arr = erfa.ufunc.dtdb(arr1, arr2, 0.0, 0.0, 0.0, 0.0)
    return np.asarray((arr1 - dep1) + (arr2 - dep2) - (d_arr - d_dep) / _SECONDS_PER_DAY)


def utc_jd_to_iso(jd1_utc: float, jd2_utc: float = 0.0, *, digits: int = 3) -> str:
    """A two-part UTC quasi-JD as ISO 8601 text with a ``Z`` (scalars only)."""
    year, month, day, hmsf, status = erfa.ufunc.d2dtf("UTC", int(digits), jd1_utc, jd2_utc)
    if int(status) < 0:
        raise InputError("jd_utc", float(jd1_utc) + float(jd2_utc), "a JD within years -4799..9999")
    t = np.asarray(hmsf).reshape(-1)[0]
    text = f"{int(year):04d}-{int(month):02d}-{int(day):02d}T{t['h']:02d}:{t['m']:02d}:{t['s']:02d}"
    return (text + f".{t['f']:0{int(digits)}d}" if digits else text) + "Z"


def round_to_utc_minute(jd_tdb: float) -> float:
    """``jd_tdb`` moved to the nearest whole UTC minute (as a JD TDB).

    Grid dates given on whole UTC minutes stay on them; refined dates rounded this way print as
    ``hh:mm:00`` exactly.
    """
    utc1, utc2 = tdb_jd_to_utc_jd(*split_jd(jd_tdb))
    minutes = np.round(np.asarray(utc2) * _MINUTES_PER_DAY)
    tdb1, tdb2 = utc_jd_to_tdb_jd(*add_days(utc1, 0.0, minutes / _MINUTES_PER_DAY))
    return float(tdb1 + tdb2)


def tdb_jd_to_utc_jd(
    jd1_tdb: ArrayLike, jd2_tdb: ArrayLike
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Two-part TDB JD to two-part UTC quasi-JD (ERFA's convention, leap seconds included)."""
    # TDB-TT evaluated at TDB instead of TT: the argument differs by < 2 ms, the result by ~1e-12 s.
    dtdb_s = erfa.ufunc.dtdb(jd1_tdb, jd2_tdb, 0.0, 0.0, 0.0, 0.0)
    tt1, tt2, _ = erfa.ufunc.tdbtt(jd1_tdb, jd2_tdb, dtdb_s)
    tai1, tai2, _ = erfa.ufunc.tttai(tt1, tt2)
    utc1, utc2, _ = erfa.ufunc.taiutc(tai1, tai2)
    return utc1, utc2


def split_jd(jd: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Split float64 JDs into (midnight day part, fraction in [0, 1)); exact in floating point."""
    jd = np.asarray(jd, dtype=float)
    jd1 = np.floor(jd - 0.5) + 0.5
    return jd1, jd - jd1


# ---------------------------------------------------------------------------------------------
# Public, string-level API
# ---------------------------------------------------------------------------------------------
@overload
def utc_to_jd_tdb(
    utc: str | Iterable[str] | ArrayLike, *, field: str = "utc", split: Literal[False] = False
) -> NDArray[np.float64]: ...


@overload
def utc_to_jd_tdb(
    utc: str | Iterable[str] | ArrayLike, *, field: str = "utc", split: Literal[True]
) -> tuple[NDArray[np.float64], NDArray[np.float64]]: ...


def utc_to_jd_tdb(
    utc: str | Iterable[str] | ArrayLike, *, field: str = "utc", split: bool = False
) -> NDArray[np.float64] | tuple[NDArray[np.float64], NDArray[np.float64]]:
    """ISO 8601 UTC strings to TDB Julian dates.

    Parameters
    ----------
    utc : str or array_like of str
        One or many ISO 8601 UTC dates/date-times (see module docstring). Dates after the last
        leap second in pyerfa's table assume no further leap seconds (:data:`FUTURE_UTC_NOTE`).
    field : str
        Name shown in error messages (e.g. ``"window.departure_start"``).
    split : bool
        False (default): one float64 JD TDB per string (about 20 microsecond resolution).
        True: a pair ``(jd1, jd2)`` whose sum is the JD TDB, accurate to nanoseconds.

    Returns
    -------
    jd_tdb : ndarray (0-d for a single string) or tuple of two ndarrays

    Raises
    ------
    InputError
        A string that is not an accepted ISO 8601 form or not a real calendar date/time.

    Examples
    --------
    >>> round(float(utc_to_jd_tdb("2000-01-01T11:58:55.816Z")), 8)
    2451545.0
    """
    jd1_utc, jd2_utc = parse_iso_utc(utc, field)
    tdb1, tdb2 = utc_jd_to_tdb_jd(jd1_utc, jd2_utc)
    if split:
        return np.asarray(tdb1), np.asarray(tdb2)
    return np.asarray(tdb1 + tdb2)


def jd_tdb_to_utc(
    jd_tdb: ArrayLike, jd_tdb2: ArrayLike = 0.0, *, digits: int = 3, suffix: str = "Z"
) -> str | NDArray[np.str_]:
    """TDB Julian dates to ISO 8601 UTC date-time strings.

    Parameters
    ----------
    jd_tdb : array_like
        JD TDB (or the first part of a two-part date).
    jd_tdb2 : array_like, optional
        Second part of a two-part date; broadcast with ``jd_tdb``.
    digits : int
        Decimal places of seconds, 0-9 (rounded; ERFA carries into minutes, hours, days).
    suffix : str
        Appended to every string, ``"Z"`` by default; ``""`` for none.

    Returns
    -------
    str for scalar input, else an array of str with the broadcast shape.
    """
    return _format(jd_tdb, jd_tdb2, digits, suffix, utc=True)


def jd_tdb_to_iso_tdb(
    jd_tdb: ArrayLike, jd_tdb2: ArrayLike = 0.0, *, digits: int = 3
) -> str | NDArray[np.str_]:
    """TDB Julian dates to ISO 8601 calendar date-times in the TDB scale itself (no suffix).

    For labels of ranges that are defined in TDB (e.g. an ephemeris file's coverage).
    """
    return _format(jd_tdb, jd_tdb2, digits, "", utc=False)


def _format(jd_tdb, jd_tdb2, digits, suffix: str, *, utc: bool):
    if not 0 <= int(digits) <= 9:
        raise InputError("digits", digits, "an integer 0-9")
    a = np.asarray(jd_tdb, dtype=float)
    b = np.asarray(jd_tdb2, dtype=float)
    a, b = np.broadcast_arrays(a, b)
    finite = np.isfinite(a) & np.isfinite(b)
    if not np.all(finite):
        raise InputError("jd_tdb", float(a[~finite][0]), "finite numbers")
    day1, frac1 = split_jd(a)
    jd1, jd2 = day1, frac1 + b
    if utc:
        jd1, jd2 = tdb_jd_to_utc_jd(jd1, jd2)
    scale = "UTC" if utc else "TDB"
    year, month, day, hmsf, status = erfa.ufunc.d2dtf(scale, int(digits), jd1, jd2)
    status = np.asarray(status).reshape(-1)
    if np.any(status < 0):
        k = int(np.flatnonzero(status < 0)[0])
        raise InputError("jd_tdb", float((a + b).reshape(-1)[k]), "a JD within years -4799..9999")
    width = int(digits)
    year_f, month_f, day_f = (np.asarray(x).reshape(-1) for x in (year, month, day))
    hmsf_f = np.asarray(hmsf).reshape(-1)
    out = []
    for y, mo, d, t in zip(year_f, month_f, day_f, hmsf_f, strict=True):
        text = f"{y:04d}-{mo:02d}-{d:02d}T{t['h']:02d}:{t['m']:02d}:{t['s']:02d}"
        if width:
            text += f".{t['f']:0{width}d}"
        out.append(text + suffix)
    if a.ndim == 0:
        return out[0]
    return np.array(out).reshape(a.shape)


__all__ = [
    "FUTURE_UTC_NOTE",
    "ISO_UTC_ACCEPTED",
    "LAST_LEAP_SECOND_UTC",
    "TAI_MINUS_UTC_LATEST_S",
    "add_days",
    "elapsed_days",
    "jd_tdb_to_iso_tdb",
    "jd_tdb_to_utc",
    "parse_iso_utc",
    "round_to_utc_minute",
    "split_jd",
    "tdb_jd_to_utc_jd",
    "tt_jd_to_tdb_jd",
    "utc_jd_to_iso",
    "utc_jd_to_tdb_jd",
    "utc_jd_to_tt_jd",
    "utc_to_jd_tdb",
]
