"""UTC <-> TDB against astropy.time (independent reference implementation, test-only dependency).

astropy and we both rest on ERFA, but astropy parses strings, keeps its own leap-second table
(from astropy-iers-data) and chains the scales its own way; agreement to 1 microsecond over
1900-2100 and on leap-second days is the check the issue asks for.
"""

from __future__ import annotations

import warnings
from datetime import datetime, timedelta

import numpy as np
import pytest
from astropy.time import Time
from hypothesis import given, settings
from hypothesis import strategies as st

from solver.ephemeris.timescales import (
    FUTURE_UTC_NOTE,
    LAST_LEAP_SECOND_UTC,
    jd_tdb_to_iso_tdb,
    jd_tdb_to_utc,
    utc_to_jd_tdb,
)
from solver.errors import InputError

ONE_MICROSECOND_S = 1e-6


def _astropy_tdb(strings):
    with warnings.catch_warnings():
        # astropy warns ("dubious year") for pre-1960 and far-future UTC, as ERFA flags them.
        warnings.simplefilter("ignore")
        t = Time(list(strings), format="isot", scale="utc").tdb
    return t.jd1, t.jd2


def _diff_s(a1, a2, b1, b2):
    return ((np.asarray(a1) - b1) + (np.asarray(a2) - b2)) * 86400.0


def _random_isot(n: int, seed: int, start_year: int = 1900, end_year: int = 2100) -> list[str]:
    rng = np.random.default_rng(seed)
    start = datetime(start_year, 1, 1)
    span_s = (datetime(end_year, 12, 31) - start).total_seconds()
    out = []
    for offset in rng.uniform(0.0, span_s, n):
        moment = start + timedelta(seconds=float(offset))
        out.append(moment.strftime("%Y-%m-%dT%H:%M:%S.%f"))
    return out


def test_utc_to_tdb_agrees_with_astropy_1900_2100(validation):
    strings = _random_isot(400, seed=1)
    ours = utc_to_jd_tdb(strings, split=True)
    ref = _astropy_tdb(strings)
    worst_s = float(np.max(np.abs(_diff_s(*ours, *ref))))
    assert worst_s < ONE_MICROSECOND_S
    validation.record(
        "UTC to TDB, 400 random instants 1900-2100",
        source="astropy.time.Time (docs/references.md 9)",
        tag="independent library",
        measured=worst_s,
        tolerance=ONE_MICROSECOND_S,
        unit="s",
    )


LEAP_SECOND_CASES = [
    "1972-06-30T23:59:60.000",  # first leap second
    "1998-12-31T23:59:60.250",
    "2005-12-31T23:59:60.999",
    "2015-06-30T23:59:60.500",
    "2016-12-31T23:59:59.999",
    "2016-12-31T23:59:60.000",
    "2016-12-31T23:59:60.500",
    "2017-01-01T00:00:00.000",
    "1968-02-01T00:00:00.000",  # 1960-1972: UTC with drifting offsets ("rubber seconds")
    "1965-07-01T06:30:00.000",
]


@pytest.mark.parametrize("text", LEAP_SECOND_CASES)
def test_leap_second_days_agree_with_astropy(text):
    ours = utc_to_jd_tdb(text, split=True)
    ref = _astropy_tdb([text])
    assert abs(float(_diff_s(*ours, ref[0][0], ref[1][0]))) < ONE_MICROSECOND_S


def test_leap_second_adds_one_second():
    # TAI-UTC stepped from 36 s to 37 s at 2017-01-01 [common practice; IERS Bulletin C 52].
    before = utc_to_jd_tdb("2016-12-31T23:59:59", split=True)
    after = utc_to_jd_tdb("2017-01-01T00:00:00", split=True)
    assert _diff_s(*after, *before) == pytest.approx(2.0, abs=1e-6)


@pytest.mark.parametrize(
    "text", [*LEAP_SECOND_CASES, "2030-05-01T12:34:56.789", "1901-01-01T00:00:00.000"]
)
def test_round_trip_to_utc_string(text):
    jd1, jd2 = utc_to_jd_tdb(text, split=True)
    assert jd_tdb_to_utc(jd1, jd2, digits=3) == text + "Z"


def test_tdb_to_utc_agrees_with_astropy():
    strings = _random_isot(200, seed=2)
    ref1, ref2 = _astropy_tdb(strings)
    ours = jd_tdb_to_utc(ref1, ref2, digits=6, suffix="")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        expected = Time(ref1, ref2, format="jd", scale="tdb").utc
        expected.precision = 6
        expected_iso = expected.isot
    assert list(ours) == list(expected_iso)


def test_j2000_epoch():
    # J2000.0 = 2000-01-01T12:00:00 TT = 11:58:55.816 UTC (TT-UTC = 64.184 s) [common practice].
    # TDB-TT there is below 2 ms (periodic terms' amplitude ~1.7 ms, from memory).
    jd = utc_to_jd_tdb("2000-01-01T11:58:55.816Z")
    assert abs(float(jd) - 2451545.0) * 86400.0 < 2e-3


def test_accepted_forms_are_equivalent():
    forms = [
        "2026-05-01",
        "2026-05-01T00:00",
        "2026-05-01T00:00:00",
        "2026-05-01T00:00:00Z",
        "2026-05-01 00:00:00.000",
        "2026-05-01T00:00:00+00:00",
        " 2026-05-01t00:00z ",
    ]
    values = utc_to_jd_tdb(forms)
    assert np.all(values == values[0])


@pytest.mark.parametrize(
    "text",
    [
        "2026-13-01",
        "2026-02-29",
        "2026-05-01T24:00",
        "2026-05-01T12:60",
        "2015-12-31T23:59:60",  # no leap second that day
        "2016-12-31T12:00:60",  # 60 s only in the last minute
        "01/05/2026",
        "2026-05-01T12:00:00+02:00",
        "",
        "tomorrow",
    ],
)
def test_bad_strings_raise_input_error_naming_field(text):
    with pytest.raises(InputError) as info:
        utc_to_jd_tdb(text, field="window.departure_start")
    message = str(info.value)
    assert "window.departure_start" in message
    assert "ISO 8601" in message


def test_non_string_is_rejected():
    with pytest.raises(InputError):
        utc_to_jd_tdb(2026.5)


def test_future_and_pre_1960_dates_emit_no_warning():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        utc_to_jd_tdb(["2150-01-01", "1850-01-01", "2199-12-31T23:59:59"])
        jd_tdb_to_utc([2500000.5, 2400000.5])


def test_future_note_names_last_leap_second():
    assert LAST_LEAP_SECOND_UTC in FUTURE_UTC_NOTE
    assert LAST_LEAP_SECOND_UTC >= "2017-01-01"


def test_shapes():
    assert utc_to_jd_tdb("2026-05-01").shape == ()
    assert utc_to_jd_tdb(["2026-05-01"] * 4).shape == (4,)
    assert utc_to_jd_tdb([["2026-05-01"] * 3] * 2).shape == (2, 3)
    assert isinstance(jd_tdb_to_utc(2461000.5), str)
    assert jd_tdb_to_utc(np.full((2, 3), 2461000.5)).shape == (2, 3)
    assert jd_tdb_to_iso_tdb(2451545.0, digits=0) == "2000-01-01T12:00:00"


@settings(max_examples=200, deadline=None)
@given(
    # From 1972 (leap-second UTC). In 1960-1971 ERFA's UTC day carries a drift term and its
    # string <-> quasi-JD pair is consistent to ~1 microsecond only (astropy shows the same).
    st.datetimes(min_value=datetime(1972, 1, 1), max_value=datetime(2199, 12, 31)),
)
def test_round_trip_property(moment):
    text = moment.strftime("%Y-%m-%dT%H:%M:%S.%f")
    jd1, jd2 = utc_to_jd_tdb(text, split=True)
    back = jd_tdb_to_utc(jd1, jd2, digits=6, suffix="")
    assert back == text
