"""Parsers that never crash: the case parser and the element CSV reader refuse anything odd with
one readable line naming the key, and never raise anything but InputError.

Each input that used to crash is pinned here (TOML nested hundreds deep: RecursionError; an
integer above 1e308: OverflowError; a newline in a title, which broke the CSV header and the
TOML written back; a message of 100 kB; an element-only case in year 0001), then hypothesis
throws generated documents and text at both parsers.
"""

from __future__ import annotations

import io
import math
import tomllib

import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from app.samples import SAMPLE_DIR
from solver.ephemeris.element_input import read_element_csv
from solver.errors import InputError
from solver.window.case import MAX_TOML_DEPTH, case_from_dict, dumps_toml, parse_case
from solver.window.settings import SECTIONS

KESTREL = (SAMPLE_DIR / "kestrel_relay_leo.toml").read_text(encoding="utf-8")
TITLE_LINE = 'title = "Kestrel-A to Kestrel-B, low Earth orbit transfer"'
MAX_MESSAGE_CHARS = 800  # field, value and accepted text, each cut (solver/errors.py)

ELEMENT_ONLY = """
[case]
title = "Moons of an invented planet"
central_body = "Zorn"
departure_body = "Ka"
target_body = "Kb"
[window]
departure_start = "{start}"
departure_end = "{end}"
arrival_start = "{start}"
arrival_end = "{end}"
departure_step_days = 1
arrival_step_days = 1
[[bodies]]
name = "Zorn"
central_body = "sun"
epoch_utc = "2030-01-01"
semi_major_axis_au = 2.0
eccentricity = 0.1
inclination_deg = 1
raan_deg = 0
arg_periapsis_deg = 0
mean_anomaly_deg = 0
gm_km3_s2 = 1000
radius_km = 500
[[bodies]]
name = "Ka"
central_body = "Zorn"
epoch_utc = "2030-01-01"
semi_major_axis_km = 2000
eccentricity = 0.1
inclination_deg = 1
raan_deg = 0
arg_periapsis_deg = 0
mean_anomaly_deg = 0
[[bodies]]
name = "Kb"
central_body = "Zorn"
epoch_utc = "2030-01-01"
semi_major_axis_km = 5000
eccentricity = 0.1
inclination_deg = 1
raan_deg = 0
arg_periapsis_deg = 0
mean_anomaly_deg = 90
"""


def refusal(call, *args) -> InputError:
    """The InputError ``call`` raises, checked to be one bounded line that names its key."""
    with pytest.raises(InputError) as caught:
        call(*args)
    return checked(caught.value)


def checked(exc: InputError) -> InputError:
    message = str(exc)
    assert "\n" not in message and "\r" not in message, message
    assert len(message) <= MAX_MESSAGE_CHARS, len(message)
    assert exc.field and message.startswith(str(exc.field)[:40]), message
    assert " is not accepted; expected " in message
    return exc


# ---------------------------------------------------------------------------------------------
# Inputs that crashed


@pytest.mark.parametrize(
    ("text", "field"),
    [
        ("x = " + "[" * 500 + "]" * 500, "case file"),
        ("x = " + "{a = " * 500 + "1" + "}" * 500, "case file"),
        ("[" + ".".join(["deep"] * 2000) + "]\n", ".".join(["deep"] * MAX_TOML_DEPTH)),
        (KESTREL.replace("max_revolutions = 3", "max_revolutions = 1" + "0" * 400), None),
        (KESTREL.replace("max_revolutions = 3", "max_revolutions = 1" + "0" * 5000), "case file"),
        (KESTREL.replace("tof_min_days = 0.01", "tof_min_days = 1e400"), "limits.tof_min_days"),
    ],
    ids=[
        "arrays-500-deep",
        "inline-tables-500-deep",
        "dotted-2000-deep",
        "int-1e400",
        "int-5000-digits",
        "float-inf",
    ],
)
def test_deep_or_huge_toml_is_one_line_naming_the_key(text, field):
    exc = refusal(parse_case, text)
    assert exc.field == (field or "transfer.max_revolutions")


@pytest.mark.parametrize("bad", ["\\n", "\\r", "\\u0000", "\\u001b[31m", "\\u202e", "\\u0085"])
def test_control_characters_in_a_title_are_refused(bad):
    text = KESTREL.replace(TITLE_LINE, f'title = "Kestrel{bad}Kestrel"')
    exc = refusal(parse_case, text)
    assert exc.field == "case.title"
    assert "control characters" in str(exc)


def test_control_characters_in_a_body_name_are_refused():
    text = KESTREL.replace('name = "Kestrel-B"', 'name = "Kestrel\\nB"')
    text = text.replace('target_body = "Kestrel-B"', 'target_body = "Kestrel\\nB"')
    exc = refusal(parse_case, text)
    assert exc.field == "bodies[2].name"


def test_a_description_keeps_its_line_breaks_and_round_trips_as_valid_toml():
    text = KESTREL.replace(
        'description = "Rendezvous',
        'description = "Two\\nlines, a \\"quote\\", a \\\\ and\\tRendezvous',
    )
    case = parse_case(text)
    assert "\n" in case.description
    again = parse_case(dumps_toml(case))
    assert again.description == case.description and again.normalized() == case.normalized()


def test_a_message_stays_readable_whatever_the_value():
    key = "k" * 100_000
    exc = refusal(parse_case, KESTREL.replace("[limits]", f"[limits]\n{key} = '{'v' * 100_000}'"))
    assert len(str(exc)) < 700


def test_text_over_a_megabyte_is_refused_before_parsing():
    exc = refusal(parse_case, KESTREL + "# " + "x" * 1_000_000 + "\n")
    assert exc.field == "case file"


@pytest.mark.parametrize(
    ("start", "end"), [("0001-01-01", "0001-02-01"), ("2999-12-01", "3001-01-01")]
)
def test_element_only_case_outside_the_element_range_is_refused(start, end):
    exc = refusal(parse_case, ELEMENT_ONLY.format(start=start, end=end))
    assert exc.field.startswith("window.")
    assert "1000-01-01 to 3000-01-01" in str(exc)


def test_element_only_case_inside_the_range_is_accepted():
    case = parse_case(ELEMENT_ONLY.format(start="2031-01-01", end="2031-02-01"))
    assert case.central_body == "Zorn"


def test_element_epoch_far_outside_the_range_is_refused():
    text = ELEMENT_ONLY.format(start="2031-01-01", end="2031-02-01")
    text = text.replace(
        'epoch_utc = "2030-01-01"\nsemi_major_axis_km = 2000',
        "epoch_jd_tdb = 1e300\nsemi_major_axis_km = 2000",
    )
    exc = refusal(parse_case, text)
    assert exc.field == "bodies[2].epoch_jd_tdb"


# ---------------------------------------------------------------------------------------------
# The element CSV reader

HEADER = (
    "name,epoch_utc,semi_major_axis_au,eccentricity,inclination_deg,raan_deg,"
    "arg_periapsis_deg,mean_anomaly_deg\n"
)


@pytest.mark.parametrize(
    "row",
    [
        "A\x00,2030-01-01,1,0.1,1,1,1,1",
        "x" * 200_000 + ",2030-01-01,1,0.1,1,1,1,1",
        "A,2030-01-01," + "9" * 400 + ",0.1,1,1,1,1",
        '"Two\nlines",2030-01-01,1,0.1,1,1,1,1',
        '"unclosed,2030-01-01,1,0.1,1,1,1,1',
        "A,0001-01-01,1,0.1,1,1,1,1",
    ],
    ids=["nul", "200k-cell", "400-digit-number", "newline-in-name", "unclosed-quote", "year-1"],
)
def test_element_csv_rows_that_crashed_are_refused_in_one_line(row):
    refusal(read_element_csv, io.StringIO(HEADER + row + "\n"))


# ---------------------------------------------------------------------------------------------
# Fuzz: generated documents and text

_KEYS = sorted(f"{section}.{name}" for section, names in SECTIONS.items() for name in names)
_scalars = st.one_of(
    st.integers(min_value=-(10**30), max_value=10**30),
    st.integers(min_value=-(2**63), max_value=2**63 - 1),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=40),
    st.sampled_from(["2031-01-01", "2031-13-45", "earth", "sun", "venus", "mars", "capture", ""]),
    st.booleans(),
    st.dates().map(lambda d: d),
)
_values = st.recursive(
    _scalars,
    lambda inner: (
        st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=8), inner, max_size=3)
    ),
    max_leaves=8,
)


def _base() -> dict:
    return tomllib.loads(KESTREL)


@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    changes=st.dictionaries(
        st.sampled_from([*_KEYS, "case.extra", "nosection.key"]), _values, max_size=4
    ),
    drop=st.lists(st.sampled_from(_KEYS), max_size=3),
)
@example(changes={"transfer.max_revolutions": 10**400}, drop=[])
@example(changes={"case.title": "a\nb"}, drop=[])
def test_fuzz_case_documents_never_crash(changes, drop):
    raw = _base()
    for dotted in drop:
        section, key = dotted.split(".", 1)
        raw.get(section, {}).pop(key, None)
    for dotted, value in changes.items():
        section, key = dotted.split(".", 1)
        table = raw.setdefault(section, {})
        if isinstance(table, dict):
            table[key] = value
    try:
        case = case_from_dict(raw)
    except InputError as exc:
        checked(exc)
        named = str(exc.field).split(".")[0].split("[")[0]
        assert named in {*SECTIONS, "bodies", "nosection"}, exc.field  # a key of the document
        return
    assert math.isfinite(case.departure_start_jd_tdb)
    assert parse_case(dumps_toml(case)).normalized() == case.normalized()  # writes valid TOML


@settings(max_examples=300, deadline=None)
@given(st.text(max_size=300) | st.binary(max_size=300).map(lambda b: b.decode("latin-1")))
@example("x = " + "[" * 400 + "]" * 400)
@example("[a]\nb = 1" + "0" * 5000)
def test_fuzz_case_text_never_crashes(text):
    for candidate in (text, KESTREL + "\n" + text, KESTREL.replace(TITLE_LINE, text[:80])):
        try:
            parse_case(candidate)
        except InputError as exc:
            checked(exc)


@settings(max_examples=300, deadline=None)
@given(st.lists(st.text(max_size=30), min_size=1, max_size=8))
def test_fuzz_element_csv_rows_never_crash(cells):
    row = ",".join(cells)
    try:
        read_element_csv(io.StringIO(HEADER + row + "\n"))
    except InputError as exc:
        checked(exc)
