"""CCSDS OEM writer, checked with the independent ``oem`` reader from PyPI.

The reader (package ``oem``) parses the header, metadata and data lines on its own and applies
the standard's constraints (keyword set, time ordering, useable span, interpolation degree).
It skips COMMENT lines, so comments are checked on the text.
"""

from __future__ import annotations

import re
from datetime import UTC, datetime, timedelta, timezone
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from oem import OrbitEphemerisMessage

from solver.errors import InputError
from solver.files.oem import (
    CAUTION_COMMENTS,
    MAX_LINE_CHARS,
    REF_FRAMES,
    TIME_SYSTEMS,
    format_oem,
    write_oem,
)
from solver.mechanics.kepler import propagate

# Heliocentric gravitational parameter, km^3/s^2: IAU 2009 / JPL value of GM_sun, from memory.
# It only shapes a realistic test arc; no check below depends on its last digits.
MU_SUN_KM3_S2 = 1.32712440018e11
AU_KM = 149_597_870.7  # IAU 2012 Resolution B2 (exact by definition), from memory

START = datetime(2031, 5, 1, 0, 0, 0)

# Round-trip bounds promised in solver/files/oem.py: 16 significant digits.
POSITION_TOLERANCE_KM = 1e-6  # 1 mm, for |r| < 1e10 km
VELOCITY_TOLERANCE_KM_S = 1e-9


def iso(moment: datetime) -> str:
    return moment.strftime("%Y-%m-%dT%H:%M:%S.%f")


def transfer_arc(n: int = 41, days: float = 200.0):
    """States along a two-body heliocentric ellipse (perihelion 1 au, aphelion ~1.5 au)."""
    r0 = np.array([AU_KM, 0.0, 0.0])
    v_circular = np.sqrt(MU_SUN_KM3_S2 / AU_KM)
    v0 = np.array([0.0, 1.09 * v_circular, 0.03 * v_circular])  # slightly inclined
    t_s = np.linspace(0.0, days * 86400.0, n)
    r, v = propagate(r0, v0, t_s, MU_SUN_KM3_S2)
    epochs = [iso(START + timedelta(seconds=float(t))) for t in t_s]
    return epochs, r, v


BASE = {
    "object_name": "PATHFINDER DEMO",
    "object_id": "UNKNOWN",
    "center_name": "SUN",
    "ref_frame": "ICRF",
    "time_system": "TDB",
    "originator": "ARCWINDOW",
    "creation_date_utc": "2025-01-01T00:00:00",
}


def read_back(path: Path):
    message = OrbitEphemerisMessage.open(path)
    (segment,) = list(message)
    states = list(segment.states)
    epochs = [state.epoch.strftime("%Y-%m-%dT%H:%M:%S.%f") for state in states]
    r = np.array([state.position for state in states])
    v = np.array([state.velocity for state in states])
    return message, segment, epochs, r, v


def sixteen_digit_bound(x: np.ndarray) -> np.ndarray:
    """Largest error of writing x with 16 significant digits and reading it back as a double."""
    magnitude = np.abs(x)
    leading_power = 10.0 ** np.floor(np.log10(np.where(magnitude > 0, magnitude, 1.0)))
    return np.where(magnitude > 0, 0.5e-15 * leading_power, 0.0) + np.spacing(magnitude)


def comment_lines(text: str) -> list[str]:
    return [line[len("COMMENT ") :] for line in text.splitlines() if line.startswith("COMMENT")]


def test_round_trip_through_the_independent_reader(tmp_path: Path, validation) -> None:
    epochs, r, v = transfer_arc()
    path = write_oem(
        tmp_path / "arc.oem",
        epochs,
        r,
        v,
        **BASE,
        comments=["Ephemeris: DE423", "Engine: 0.1.0"],
        interpolation="LAGRANGE",
        interpolation_degree=7,
        useable_start_time=epochs[1],
        useable_stop_time=epochs[-2],
    )
    message, segment, epochs_back, r_back, v_back = read_back(path)

    assert message.version == "2.0"
    assert message.header["ORIGINATOR"] == "ARCWINDOW"
    assert message.header["CREATION_DATE"].isot == "2025-01-01T00:00:00.000000"
    meta = segment.metadata
    assert (meta["OBJECT_NAME"], meta["OBJECT_ID"]) == ("PATHFINDER DEMO", "UNKNOWN")
    assert (meta["CENTER_NAME"], meta["REF_FRAME"], meta["TIME_SYSTEM"]) == ("SUN", "ICRF", "TDB")
    assert meta["START_TIME"].scale == "tdb"
    assert iso(meta["START_TIME"].datetime) == epochs[0]
    assert iso(meta["STOP_TIME"].datetime) == epochs[-1]
    assert iso(meta["USEABLE_START_TIME"].datetime) == epochs[1]
    assert iso(meta["USEABLE_STOP_TIME"].datetime) == epochs[-2]
    assert (meta["INTERPOLATION"], meta["INTERPOLATION_DEGREE"]) == ("LAGRANGE", 7)

    assert epochs_back == epochs
    np.testing.assert_allclose(r_back, r, rtol=0, atol=POSITION_TOLERANCE_KM)
    np.testing.assert_allclose(v_back, v, rtol=0, atol=VELOCITY_TOLERANCE_KM_S)
    validation.record(
        "CCSDS OEM 2.0 written by arcwindow, read by the independent `oem` package: largest "
        "position difference",
        source="CCSDS 502.0-B-3 (docs/references.md 9); the `oem` package on PyPI",
        tag="independent library",
        measured=float(np.abs(r_back - r).max()),
        tolerance=POSITION_TOLERANCE_KM,
        unit="km",
    )


def test_states_between_samples_follow_the_arc(tmp_path: Path) -> None:
    """The reader's own interpolation between our samples lands on the two-body arc."""
    epochs, r, v = transfer_arc(n=201, days=100.0)
    path = write_oem(
        tmp_path / "arc.oem", epochs, r, v, **BASE, interpolation="LAGRANGE", interpolation_degree=5
    )
    message = OrbitEphemerisMessage.open(path)
    half_step_s = 0.5 * 100.0 * 86400.0 / 200
    t_mid_s = 40 * 2 * half_step_s + half_step_s
    mid = message.span[0] + timedelta(seconds=t_mid_s)
    r_mid, _ = propagate(r[0], v[0], t_mid_s, MU_SUN_KM3_S2)
    # Degree-5 Lagrange over half-day steps on a 1 au orbit: agreement to better than a metre.
    np.testing.assert_allclose(message(mid).position, r_mid, rtol=0, atol=1e-3)


def test_layout_follows_the_standard() -> None:
    epochs, r, v = transfer_arc(n=5)
    text = format_oem(epochs, r, v, **BASE, comments=["Ephemeris: DE423"])
    lines = text.splitlines()
    assert lines[0] == "CCSDS_OEM_VERS = 2.0"
    # Comments only right after the version line: header comments precede CREATION_DATE.
    first_non_comment = next(i for i, line in enumerate(lines[1:], 1) if "COMMENT" not in line)
    assert lines[first_non_comment].startswith("CREATION_DATE = ")
    assert all("COMMENT" not in line for line in lines[first_non_comment:])
    keywords = [line.split(" = ")[0] for line in lines if " = " in line]
    assert keywords == [
        "CCSDS_OEM_VERS",
        "CREATION_DATE",
        "ORIGINATOR",
        "OBJECT_NAME",
        "OBJECT_ID",
        "CENTER_NAME",
        "REF_FRAME",
        "TIME_SYSTEM",
        "START_TIME",
        "STOP_TIME",
    ]
    # Printable ASCII, at most 254 characters a line (502.0-B-3 7.3.2, 7.3.4).
    assert all(len(line) <= MAX_LINE_CHARS for line in lines)
    assert re.fullmatch(r"[ -~\n]*", text)
    # Numbers: mantissa of at most 16 digits with the point in second place (7.5.7).
    number = r"[+-]?\d\.\d{1,15}e[+-]\d+"
    data = lines[lines.index("META_STOP") + 2 :]
    assert len(data) == 5
    for line in data:
        epoch, *values = line.split()
        assert epoch in epochs
        assert len(values) == 6 and all(re.fullmatch(number, value) for value in values)


def test_comment_block_survives_in_order(tmp_path: Path) -> None:
    epochs, r, v = transfer_arc(n=5)
    long_note = "Case hash " + "0123456789abcdef" * 4 + ". " + "word " * 80
    provenance = [
        "Ephemeris: DE423 (JPL DE ephemeris)\nConstants: solver/constants.py",
        "  Indented line keeps its leading spaces",
        "",
        long_note.strip(),
    ]
    path = write_oem(tmp_path / "arc.oem", epochs, r, v, **BASE, comments=provenance)
    text = path.read_text(encoding="ascii")
    got = comment_lines(text)
    assert got[: len(CAUTION_COMMENTS)] == list(CAUTION_COMMENTS)
    assert got[len(CAUTION_COMMENTS)].startswith("Generated by arcwindow")
    ours = got[len(CAUTION_COMMENTS) + 1 :]
    assert ours[:4] == [
        "Ephemeris: DE423 (JPL DE ephemeris)",
        "Constants: solver/constants.py",
        "  Indented line keeps its leading spaces",
        "",
    ]
    wrapped = ours[4:]
    assert len(wrapped) > 1 and all(len("COMMENT " + line) <= MAX_LINE_CHARS for line in wrapped)
    assert " ".join(wrapped).split() == long_note.split()
    read_back(path)  # the independent reader still accepts the file


def test_creation_date_forms() -> None:
    epochs, r, v = transfer_arc(n=2)
    args = {**BASE}
    args.pop("creation_date_utc")
    aware = datetime(2030, 1, 1, 2, 30, tzinfo=timezone(timedelta(hours=2)))
    text = format_oem(epochs, r, v, **args, creation_date_utc=aware)
    assert "CREATION_DATE = 2030-01-01T00:30:00\n" in text
    before = datetime.now(UTC).replace(microsecond=0)
    text = format_oem(epochs, r, v, **args)
    stamp = re.search(r"CREATION_DATE = (\S+)", text).group(1)
    written = datetime.fromisoformat(stamp).replace(tzinfo=UTC)
    assert before <= written <= datetime.now(UTC)


@pytest.mark.parametrize("time_system", TIME_SYSTEMS)
@pytest.mark.parametrize("ref_frame", ["ICRF", "EME2000", "eme2000"])
def test_accepted_time_systems_and_frames(time_system: str, ref_frame: str) -> None:
    epochs, r, v = transfer_arc(n=2)
    args = {**BASE, "time_system": time_system, "ref_frame": ref_frame}
    text = format_oem(epochs, r, v, **args)
    assert f"TIME_SYSTEM = {time_system}\n" in text
    assert f"REF_FRAME = {ref_frame.upper()}\n" in text
    assert ref_frame.upper() in REF_FRAMES


def test_leap_second_only_in_utc() -> None:
    epochs = ["2016-12-31T23:59:59.500000", "2016-12-31T23:59:60.500000", "2017-01-01T00:00:00"]
    r = np.full((3, 3), 7000.0)
    v = np.full((3, 3), 7.5)
    text = format_oem(epochs, r, v, **{**BASE, "time_system": "UTC", "center_name": "EARTH"})
    assert "2016-12-31T23:59:60.500000" in text
    with pytest.raises(InputError) as info:
        format_oem(epochs, r, v, **{**BASE, "time_system": "TDB"})
    assert info.value.field == "epochs[1]"


# --------------------------------------------------------------------------------------------
# Bad inputs: InputError naming the field


def _bad_cases():
    epochs, r, v = transfer_arc(n=4)
    nan_r = r.copy()
    nan_r[2, 1] = np.nan
    inf_v = v.copy()
    inf_v[0, 0] = np.inf
    swapped = [epochs[0], epochs[2], epochs[1], epochs[3]]
    repeated = [epochs[0], epochs[1], epochs[1], epochs[3]]
    degree = "interpolation_degree"
    return [
        ("mismatched r", dict(r_km=r[:3]), "r_km.shape"),
        ("mismatched v", dict(v_km_s=v[:, :2]), "v_km_s.shape"),
        ("no epochs", dict(epochs=[], r_km=r[:0], v_km_s=v[:0]), "epochs"),
        ("epochs as one string", dict(epochs=epochs[0]), "epochs"),
        ("decreasing epochs", dict(epochs=swapped), "epochs[2]"),
        ("repeated epoch", dict(epochs=repeated), "epochs[2]"),
        ("nan position", dict(r_km=nan_r), "r_km[2]"),
        ("infinite velocity", dict(v_km_s=inf_v), "v_km_s[0]"),
        ("non-numeric states", dict(r_km=[["a", "b", "c"]] * 4), "r_km"),
        ("space instead of T", dict(epochs=[e.replace("T", " ") for e in epochs]), "epochs[0]"),
        ("Zulu suffix", dict(epochs=[e + "Z" for e in epochs]), "epochs[0]"),
        ("day of year form", dict(epochs=["2031-121T00:00:00", *epochs[1:]]), "epochs[0]"),
        ("30 February", dict(epochs=["2031-02-30T00:00:00", *epochs[1:]]), "epochs[0]"),
        ("hour 24", dict(epochs=["2031-04-30T24:00:00", *epochs[1:]]), "epochs[0]"),
        ("unknown time system", dict(time_system="GMT"), "time_system"),
        ("relative time system", dict(time_system="MET"), "time_system"),
        ("unknown frame", dict(ref_frame="ECLIPJ2000"), "ref_frame"),
        ("mean-element frame", dict(ref_frame="TEME"), "ref_frame"),
        ("empty object name", dict(object_name="  "), "object_name"),
        ("newline in object id", dict(object_id="A\nB"), "object_id"),
        ("non-ASCII center", dict(center_name="SOLEIL ☉"), "center_name"),
        ("originator too long", dict(originator="X" * 250), "originator"),
        ("non-ASCII comment", dict(comments=["ok", "μ_sun from constants"]), "comments[1]"),
        ("tab in comment", dict(comments=["a\tb"]), "comments[0]"),
        ("comments as one string", dict(comments="Ephemeris: DE423"), "comments"),
        ("naive creation date", dict(creation_date_utc=datetime(2030, 1, 1)), "creation_date_utc"),
        ("bad creation date", dict(creation_date_utc="yesterday"), "creation_date_utc"),
        ("interpolation without degree", dict(interpolation="HERMITE"), degree),
        ("degree without method", dict(interpolation_degree=3), degree),
        ("unknown method", dict(interpolation="SPLINE", interpolation_degree=3), "interpolation"),
        ("degree too high", dict(interpolation="LAGRANGE", interpolation_degree=5), degree),
        ("linear degree 2", dict(interpolation="LINEAR", interpolation_degree=2), degree),
        ("useable start alone", dict(useable_start_time=epochs[1]), "useable_stop_time"),
        (
            "useable span reversed",
            dict(useable_start_time=epochs[2], useable_stop_time=epochs[1]),
            "useable_start_time, useable_stop_time",
        ),
        (
            "useable span outside data",
            dict(useable_start_time=epochs[1], useable_stop_time="2040-01-01T00:00:00"),
            "useable_start_time, useable_stop_time",
        ),
    ]


@pytest.mark.parametrize(
    ("name", "change", "field"), _bad_cases(), ids=[c[0] for c in _bad_cases()]
)
def test_bad_input_names_the_field(tmp_path: Path, name: str, change: dict, field: str) -> None:
    epochs, r, v = transfer_arc(n=4)
    args = {"epochs": epochs, "r_km": r, "v_km_s": v, **BASE, **change}
    target = tmp_path / "never.oem"
    with pytest.raises(InputError) as info:
        write_oem(target, **args)
    assert info.value.field == field, name
    assert field.split("[")[0].split(".")[0].split(",")[0] in str(info.value)
    assert not target.exists()  # nothing is written when an input is refused


# --------------------------------------------------------------------------------------------
# Property: any valid arc round-trips through the independent reader


@st.composite
def arcs(draw):
    n = draw(st.integers(min_value=1, max_value=12))
    steps_us = draw(
        st.lists(st.integers(1, 10**12), min_size=n - 1, max_size=n - 1)
    )  # 1 microsecond to ~11.6 days
    start = START + timedelta(microseconds=draw(st.integers(0, 10**15)))
    moments = [start]
    for step in steps_us:
        moments.append(moments[-1] + timedelta(microseconds=step))
    position = st.floats(min_value=-9.99e9, max_value=9.99e9, allow_nan=False, width=64)
    velocity = st.floats(min_value=-999.0, max_value=999.0, allow_nan=False, width=64)
    r = np.array(draw(st.lists(st.tuples(position, position, position), min_size=n, max_size=n)))
    v = np.array(draw(st.lists(st.tuples(velocity, velocity, velocity), min_size=n, max_size=n)))
    return [iso(m) for m in moments], r.reshape(n, 3), v.reshape(n, 3)


# The reader turns UTC epochs into astropy times; past the leap-second table erfa warns.
@pytest.mark.filterwarnings("ignore::erfa.ErfaWarning")
@settings(max_examples=40, deadline=None)
@given(arc=arcs(), time_system=st.sampled_from(["TDB", "TT", "UTC", "TAI"]))
def test_any_arc_round_trips(arc, time_system: str, tmp_path_factory) -> None:
    epochs, r, v = arc
    path = tmp_path_factory.mktemp("oem") / "arc.oem"
    write_oem(path, epochs, r, v, **{**BASE, "time_system": time_system})
    _, segment, epochs_back, r_back, v_back = read_back(path)
    assert segment.metadata["TIME_SYSTEM"] == time_system
    assert epochs_back == epochs
    for sent, got in ((r, r_back), (v, v_back)):
        assert np.all(np.abs(got - sent) <= sixteen_digit_bound(sent))
    assert np.all(np.abs(r_back - r) < POSITION_TOLERANCE_KM)
    assert np.all(np.abs(v_back - v) < VELOCITY_TOLERANCE_KM_S)
