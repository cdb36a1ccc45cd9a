"""The [sequence] section of case files: what is accepted, what is refused and how errors read.

Property tests (hypothesis) build sequence tables from parts and check that valid ones parse to
the values written, and that one bad value is refused with an error naming its key.
"""

from __future__ import annotations

import copy
import tomllib

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from app.samples import sequence_case_paths
from solver.errors import InputError
from solver.sequence.limits import WINDOW_LIMIT_RULES
from solver.sequence.spec import (
    load_sequence_case,
    parse_sequence_case,
    sequence_case_from_dict,
)
from solver.window.case import load_case
from solver.window.limits import LIMIT_RULES

BASE = """
[case]
title = "test sequence"
central_body = "sun"
departure_body = "earth"
target_body = "jupiter"

[window]
departure_start = "2034-01-01"
departure_end = "2034-12-31"
departure_step_days = 5
arrival_start = "2036-01-01"
arrival_end = "2042-12-31"
arrival_step_days = 10
"""

LEGS = """
[[sequence.legs]]
to = "venus"
tof_min_days = 80
tof_max_days = 200

[[sequence.legs]]
to = "earth"
kind = "flyby"
tof_min_days = 150
tof_max_days = 500

[[sequence.legs]]
tof_min_days = 700
tof_max_days = 1400
"""


def raw(sequence: str = "[sequence]\n" + LEGS) -> dict:
    return tomllib.loads(BASE + sequence)


def test_every_sample_sequence_case_loads_and_is_a_valid_window_case():
    paths = sequence_case_paths()
    assert len(paths) >= 3
    kinds = set()
    for path in paths:
        sequence_case = load_sequence_case(path)
        load_case(path)  # the one-leg reading of the same file stays valid
        for spec in sequence_case.sequences:
            kinds |= {leg.kind for leg in spec.legs}
            assert spec.bodies[0] == sequence_case.case.departure_body
            assert spec.bodies[-1] == sequence_case.case.target_body
    assert {"flyby", "stop", "arrival"} <= kinds


def test_a_one_leg_case_is_a_sequence_of_one_leg():
    sequence_case = sequence_case_from_dict(tomllib.loads(BASE))
    (spec,) = sequence_case.sequences
    (leg,) = spec.legs
    assert leg.kind == "arrival" and leg.to_body == "jupiter"
    case = sequence_case.case
    assert leg.tof_min_days == pytest.approx(case.arrival_start_jd_tdb - case.departure_end_jd_tdb)
    assert leg.tof_max_days == pytest.approx(case.arrival_end_jd_tdb - case.departure_start_jd_tdb)


def test_the_legs_encounters_and_variables():
    spec = sequence_case_from_dict(raw()).sequences[0]
    assert spec.name == "earth-venus-earth-jupiter"
    assert spec.bodies == ("earth", "venus", "earth", "jupiter")
    assert [e.kind for e in spec.events] == ["departure", "flyby", "flyby", "arrival"]
    assert spec.legs[0].altitude_min_km == 300.0  # the built-in Venus default
    assert spec.variable_names == (
        "departure_jd_tdb",
        "leg1_tof_days",
        "leg2_tof_days",
        "leg3_tof_days",
    )


def test_a_stop_takes_two_dates_and_a_stay_variable():
    text = """[sequence]
[[sequence.legs]]
to = "mars"
kind = "stop"
tof_min_days = 150
tof_max_days = 300
stay_min_days = 30
stay_max_days = 60
periapsis_altitude_km = 400
[[sequence.legs]]
tof_min_days = 150
tof_max_days = 300
"""
    data = tomllib.loads(BASE.replace('target_body = "jupiter"', 'target_body = "earth"') + text)
    spec = sequence_case_from_dict(data).sequences[0]
    assert spec.n_epochs == 4
    assert spec.variable_names == (
        "departure_jd_tdb",
        "leg1_tof_days",
        "stop1_stay_days",
        "leg2_tof_days",
    )
    stop = spec.legs[0]
    assert (stop.mode, stop.periapsis_altitude_km, stop.apoapsis_altitude_km) == (
        "capture",
        400,
        400,
    )
    import numpy as np

    x = np.array([[2462000.5, 200.0, 45.0, 250.0]])
    epochs = spec.epochs(x)
    assert epochs.tolist() == [[2462000.5, 2462200.5, 2462245.5, 2462495.5]]
    assert np.array_equal(spec.variables(epochs), x)


def test_several_sequences_are_kept_in_order_with_unique_names():
    text = "[[sequence]]\n" + LEGS + '[[sequence]]\nname = "direct"\n[[sequence.legs]]\n'
    text += "tof_min_days = 700\ntof_max_days = 1400\n"
    sequence_case = sequence_case_from_dict(raw(text))
    assert [s.name for s in sequence_case.sequences] == ["earth-venus-earth-jupiter", "direct"]
    clash = text.replace('name = "direct"', 'name = "earth-venus-earth-jupiter"')
    with pytest.raises(InputError) as info:
        sequence_case_from_dict(raw(clash))
    assert info.value.field == "sequence[2].name"


def test_every_one_leg_limit_has_a_place_in_a_sequence():
    assert [r.window_rule for r in WINDOW_LIMIT_RULES] == list(LIMIT_RULES)


# ---------------------------------------------------------------------------------------------
# Bad sequences: one error naming the key


def _legs(data: dict) -> list[dict]:
    return data["sequence"]["legs"]


@pytest.mark.parametrize(
    ("change", "field"),
    [
        (lambda d: _legs(d)[0].update(to="vulcan"), "sequence.legs[1].to"),
        (lambda d: _legs(d)[0].update(to="sun"), "sequence.legs[1].to"),
        (lambda d: d["sequence"].update(legs=[]), "sequence.legs"),
        (lambda d: d["sequence"].pop("legs"), "sequence.legs"),
        (lambda d: _legs(d)[1].update(tof_max_days=10), "sequence.legs[2].tof_max_days"),
        (lambda d: _legs(d)[1].pop("tof_min_days"), "sequence.legs[2].tof_min_days"),
        (lambda d: _legs(d)[1].update(kind="orbit"), "sequence.legs[2].kind"),
        (lambda d: _legs(d)[2].update(to="saturn"), "sequence.legs[3].to"),
        (lambda d: _legs(d)[2].update(kind="flyby"), "sequence.legs[3].kind"),
        (lambda d: _legs(d)[0].update(stay_max_days=10), "sequence.legs[1].stay_max_days"),
        (lambda d: _legs(d)[0].update(color="red"), "sequence.legs[1].color"),
        (lambda d: d["sequence"].update(objective="fun"), "sequence.objective"),
        (lambda d: _legs(d)[0].update(to="emb"), "sequence.legs[1].kind"),
        (lambda d: _legs(d)[0].update(resonance="2:1"), "sequence.legs[1].resonance"),
        (lambda d: _legs(d)[1].update(resonance="two"), "sequence.legs[2].resonance"),
        (lambda d: _legs(d)[2].update(tof_max_days=90_000), "sequence.legs[3].tof_max_days"),
    ],
)
def test_bad_sequences_name_the_key(change, field):
    data = raw()
    change(data)
    with pytest.raises(InputError) as info:
        sequence_case_from_dict(data)
    assert info.value.field == field
    assert "\n" not in str(info.value)


def test_a_stop_whose_longest_stay_is_below_its_shortest_names_the_longest():
    data = raw()
    _legs(data)[1].update(kind="stop", stay_min_days=60, stay_max_days=30)
    with pytest.raises(InputError) as info:
        sequence_case_from_dict(data)
    assert info.value.field == "sequence.legs[2].stay_max_days"
    assert "stay_min_days" in info.value.accepted


def test_toml_errors_and_unknown_sections_still_name_what_is_wrong():
    with pytest.raises(InputError) as info:
        parse_sequence_case(BASE + "[sequence\n")
    assert info.value.field == "case file"
    with pytest.raises(InputError) as info:
        parse_sequence_case(BASE + "[sequences]\nx = 1\n")
    assert info.value.field == "sequences"


# ---------------------------------------------------------------------------------------------
# Properties

BODIES = ["mercury", "venus", "earth", "mars", "jupiter", "saturn"]


@st.composite
def sequence_tables(draw):
    n_legs = draw(st.integers(1, 5))
    legs = []
    for k in range(n_legs):
        low = draw(st.floats(1.0, 2000.0))
        leg = {
            "tof_min_days": low,
            "tof_max_days": low + draw(st.floats(0.0, 500.0)),
        }
        if k < n_legs - 1:
            leg["to"] = draw(st.sampled_from(BODIES))
            kind = draw(st.sampled_from(["flyby", "stop"]))
            leg["kind"] = kind
            if kind == "stop":
                stay = draw(st.floats(0.0, 400.0))
                leg["stay_min_days"] = stay
                leg["stay_max_days"] = stay + draw(st.floats(0.0, 400.0))
            elif draw(st.booleans()):
                leg["altitude_min_km"] = draw(st.floats(0.0, 1e5))
        if draw(st.booleans()):
            leg["max_revolutions"] = draw(st.integers(0, 3))
        legs.append(leg)
    table = {"legs": legs}
    if draw(st.booleans()):
        table["duration_max_days"] = draw(st.floats(1.0, 1e4))
    return table


@settings(max_examples=150, deadline=None)
@given(sequence_tables())
def test_valid_sequences_parse_to_what_was_written(table):
    data = raw("")
    data["window"]["departure_end"] = "2034-01-31"
    data["sequence"] = copy.deepcopy(table)
    spec = sequence_case_from_dict(data).sequences[0]
    assert len(spec.legs) == len(table["legs"])
    for leg, written in zip(spec.legs, table["legs"], strict=True):
        assert leg.tof_min_days == written["tof_min_days"]
        assert leg.tof_max_days == written["tof_max_days"]
        assert leg.to_body == written.get("to", "jupiter")
        assert leg.kind == written.get("kind", "arrival")
        assert leg.max_revolutions == written.get("max_revolutions", 0)
        if leg.kind == "stop":
            assert leg.stay_min_days == written["stay_min_days"]
            assert leg.stay_max_days == written["stay_max_days"]
        if "altitude_min_km" in written:
            assert leg.altitude_min_km == written["altitude_min_km"]
    assert spec.duration_max_days == table.get("duration_max_days")
    bodies = [leg.get("to", "jupiter") for leg in table["legs"]]
    assert spec.bodies == ("earth", *bodies)
    assert spec.n_epochs == 1 + len(table["legs"]) + sum(
        leg.get("kind") == "stop" for leg in table["legs"]
    )


@settings(max_examples=150, deadline=None)
@given(
    sequence_tables(),
    st.data(),
    st.sampled_from(["tof_min_days", "tof_max_days", "to", "stay_max_days", "max_revolutions"]),
    st.sampled_from([-5.0, "later", True, 10**9, "nowhere"]),
)
def test_one_bad_value_is_refused_naming_its_key(table, data, key, value):
    index = data.draw(st.integers(0, len(table["legs"]) - 1))
    leg = table["legs"][index]
    if key == "stay_max_days" and leg.get("kind") != "stop":
        key = "tof_min_days"
    if key == "to" and index == len(table["legs"]) - 1:
        value = "saturn"  # the last leg must end at the target
    leg[key] = value
    document = raw("")
    document["window"]["departure_end"] = "2034-01-31"
    document["sequence"] = table
    with pytest.raises(InputError) as info:
        sequence_case_from_dict(document)
    assert info.value.field.startswith("sequence.legs[")
    assert info.value.field.endswith((key, "tof_max_days", "stay_max_days", "kind")), (
        info.value.field
    )


def test_every_sequence_setting_and_default_altitude_is_documented():
    from pathlib import Path

    from solver.sequence.settings import FLYBY_ALTITUDE_MIN_KM, SEQUENCE_SETTINGS

    text = (Path(__file__).resolve().parents[1] / "docs" / "case-format.md").read_text()
    assert "## [sequence]" in text and "## [[sequence.legs]]" in text
    for setting in SEQUENCE_SETTINGS:
        assert f"`{setting.name}`" in text, setting.key
    for body in FLYBY_ALTITUDE_MIN_KM:
        assert f"| {body} |" in text, body
