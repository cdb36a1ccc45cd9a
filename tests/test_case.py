"""Case files: the samples load, and every kind of bad input names its key."""

from __future__ import annotations

import tomllib

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from app.samples import SAMPLE_DIR, load, sample_case_paths
from solver.errors import InputError
from solver.window.case import case_from_dict, dumps_toml, parse_case

BASE = (SAMPLE_DIR / "vesper_venus_orbiter.toml").read_text()


def _raw():
    return tomllib.loads(BASE)


def test_samples_load_and_cover_the_required_missions():
    cases = {p.stem: load(p.stem) for p in sample_case_paths()}
    assert len(cases) >= 4
    kinds = {(c.central_body, c.arrival_mode, c.max_revolutions > 0) for c in cases.values()}
    assert ("sun", "capture", False) in kinds  # interplanetary orbiter
    assert ("earth", "rendezvous", True) in kinds  # two invented satellites, multi-revolution
    assert any(c.target_body == "jupiter" and c.arrival_mode == "flyby" for c in cases.values())
    assert any(
        c.bodies and c.arrival_mode == "rendezvous" and c.central_body == "sun"
        for c in cases.values()
    )  # invented small body


def test_round_trip_through_toml():
    for path in sample_case_paths():
        case = load(path.stem)
        again = parse_case(dumps_toml(case))
        assert again.normalized() == case.normalized(), path.stem


@pytest.mark.parametrize(
    ("section", "key", "value", "field"),
    [
        ("case", "target_body", "vulcan", "case.target_body"),
        ("case", "departure_body", 42, "case.departure_body"),
        ("case", "colour", "blue", "case.colour"),
        ("window", "departure_start", "2031-13-01", "window.departure_start"),
        ("window", "departure_end", "2031-02-01", "window.departure_end"),
        ("window", "arrival_end", "2030-01-01", "window.arrival_end"),
        ("window", "departure_start", "2250-01-01", "window.departure_start"),
        ("window", "departure_step_days", 0, "window.departure_step_days"),
        ("window", "arrival_step_days", "one", "window.arrival_step_days"),
        ("transfer", "max_revolutions", -1, "transfer.max_revolutions"),
        ("transfer", "max_revolutions", 2.5, "transfer.max_revolutions"),
        ("transfer", "direction", "sideways", "transfer.direction"),
        ("departure_orbit", "altitude_km", -5, "departure_orbit.altitude_km"),
        ("arrival_orbit", "mode", "landing", "arrival_orbit.mode"),
        ("arrival_orbit", "apoapsis_altitude_km", 100, "arrival_orbit.apoapsis_altitude_km"),
        ("limits", "c3_max_km2_s2", -1, "limits.c3_max_km2_s2"),
        ("limits", "dla_max_deg", 120, "limits.dla_max_deg"),
        ("limits", "tof_max_days", 10, "limits.tof_max_days"),
        ("limits", "c3_max", 10, "limits.c3_max"),
        ("ephemeris", "source", "de999", "ephemeris.source"),
    ],
)
def test_bad_keys_name_the_key(section, key, value, field):
    raw = _raw()
    raw.setdefault(section, {})[key] = value
    with pytest.raises(InputError) as info:
        case_from_dict(raw)
    assert info.value.field == field
    assert "expected" in str(info.value)


def test_missing_tables_and_bodies():
    raw = _raw()
    del raw["window"]
    with pytest.raises(InputError, match="window"):
        case_from_dict(raw)
    raw = _raw()
    raw["bodies"] = [
        {
            "name": "Nix2",
            "eccentricity": -0.1,
            "inclination_deg": 1,
            "raan_deg": 0,
            "arg_periapsis_deg": 0,
            "semi_major_axis_au": 2,
            "mean_anomaly_deg": 0,
            "epoch_utc": "2030-01-01",
        }
    ]
    with pytest.raises(InputError, match=r"bodies\[1\]\.eccentricity"):
        case_from_dict(raw)
    raw["bodies"][0]["eccentricity"] = 1.2  # hyperbola with positive a
    with pytest.raises(InputError, match=r"bodies\[1\]\.semi_major_axis_au"):
        case_from_dict(raw)
    with pytest.raises(InputError, match="valid TOML"):
        parse_case("[case\ntitle=")


def test_unknown_body_lists_known_names():
    raw = _raw()
    raw["case"]["target_body"] = "vulcan"
    with pytest.raises(InputError) as info:
        case_from_dict(raw)
    assert "venus" in str(info.value) and "vulcan" in str(info.value)


def test_with_changes_revalidates():
    case = load("vesper_venus_orbiter")
    wider = case.with_changes(**{"limits.c3_max_km2_s2": 25.0})
    assert wider.limits.c3_max_km2_s2 == 25.0
    with pytest.raises(InputError, match=r"limits\.c3_max_km2_s2"):
        case.with_changes(**{"limits.c3_max_km2_s2": 1e9})


_values = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(-(10**6), 10**6),
    st.floats(allow_nan=True),
    st.text(max_size=12),
    st.lists(st.integers(), max_size=2),
)


@settings(max_examples=300, deadline=None)
@given(
    section=st.sampled_from(
        ["case", "window", "transfer", "departure_orbit", "arrival_orbit", "limits", "ephemeris"]
    ),
    key=st.sampled_from(
        [
            "title",
            "target_body",
            "departure_start",
            "arrival_end",
            "departure_step_days",
            "max_revolutions",
            "direction",
            "altitude_km",
            "mode",
            "periapsis_altitude_km",
            "c3_max_km2_s2",
            "tof_min_days",
            "source",
            "junk",
        ]
    ),
    value=_values,
)
def test_property_parser_accepts_or_names_a_key(section, key, value):
    raw = _raw()
    if value is None:
        raw.get(section, {}).pop(key, None)
    else:
        raw.setdefault(section, {})[key] = value
    try:
        case = case_from_dict(raw)
    except InputError as exc:
        assert exc.field and "expected" in str(exc)
    else:
        assert case.title
