"""``arcwindow lambert``: output, errors naming the field, and the argument parsers."""

from __future__ import annotations

import json
import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from app.cli import main
from app.commands.lambert_cmd import parse_positive, parse_vector_km
from solver.errors import InputError

CURTIS = [
    "--mu-km3-s2",
    "398600",
    "--r1-km",
    "5000,10000,2100",
    "--r2-km=-14600,2500,7000",
    "--tof-s",
    "3600",
]


def test_lambert_json_lists_every_arc(capsys):
    assert main(["lambert", *CURTIS, "--max-revs", "1", "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    arcs = report["arcs"]
    assert [(a["revolutions"], a["branch"]) for a in arcs] == [
        (0, "single"),
        (1, "low"),
        (1, "high"),
    ]
    first = arcs[0]
    # Curtis Example 5.2 [MEMORY, agrees with COMPUTED]: v1 = (-5.9925, 1.9254, 3.2456) km/s
    assert first["v1_km_s"] == pytest.approx([-5.9925, 1.9254, 3.2456], abs=1e-4)
    assert first["family"].startswith("short-way ellipse")
    assert {"a_km", "e", "v2_km_s", "family"} <= first.keys()
    # one hour is far too short for a revolution at these radii: the reason is given
    assert "minimum" in arcs[1]["reason"]
    assert "confirm with high-fidelity tools" in report["caution"]


def test_lambert_text_output(capsys):
    assert main(["lambert", *CURTIS]) == 0
    out = capsys.readouterr().out
    assert "v1 = (-5.992495, 1.925363, 3.245637) km/s" in out
    assert "Caution" in out


@pytest.mark.parametrize(
    ("args", "field"),
    [
        (["--r1-km", "5000,10000"], "--r1-km"),
        (["--r1-km", "a,b,c"], "--r1-km"),
        (["--r1-km", "0,0,0"], "--r1-km"),
        (["--tof-s", "-5"], "--tof-s"),
        (["--tof-s", "nan"], "--tof-s"),
        (["--mu-km3-s2", "0"], "--mu-km3-s2"),
        (["--max-revs", "-1"], "--max-revs"),
        (["--max-revs", "two"], "--max-revs"),
    ],
)
def test_bad_input_names_the_field(capsys, args, field):
    argv = ["lambert", "--r2-km=-14600,2500,7000"]
    merged = {"--mu-km3-s2": "398600", "--r1-km": "5000,10000,2100", "--tof-s": "3600"}
    merged.update(dict(zip(args[::2], args[1::2], strict=True)))
    for key, value in merged.items():
        argv += [key, value]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert field in err and "expected" in err
    assert "Traceback" not in err


@given(st.tuples(*[st.floats(allow_nan=False, allow_infinity=False)] * 3))
def test_vector_parser_round_trip(values):
    text = ",".join(repr(v) for v in values)
    assert parse_vector_km(text, "--r1-km") == values


@given(st.text())
def test_vector_parser_never_crashes(text):
    try:
        values = parse_vector_km(text, "--r1-km")
    except InputError as exc:
        assert "--r1-km" in str(exc)
    else:
        assert len(values) == 3 and all(math.isfinite(v) for v in values)


@given(st.text())
def test_positive_parser_never_crashes(text):
    try:
        value = parse_positive(text, "--tof-s", "s")
    except InputError as exc:
        assert "--tof-s" in str(exc)
    else:
        assert value > 0 and math.isfinite(value)
