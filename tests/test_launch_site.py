"""Launch sites: reachable inclinations and asymptotes (solver.launch.site).

The rule cos i = cos φ · sin Az against a textbook worked example (tests/reference_data/
launch_azimuth_examples.csv; docs/references.md 11.3, from memory / secondary) and against an
independent vector construction; the reachable inclination and DLA ranges against a sweep of
azimuths.
"""

from __future__ import annotations

import csv
import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from solver.launch.site import (
    LaunchSite,
    azimuths_for_inclination_deg,
    inclination_deg,
    max_declination_deg,
)


def _examples(reference_data_dir):
    with open(reference_data_dir / "launch_azimuth_examples.csv", encoding="utf-8") as handle:
        return list(csv.DictReader(line for line in handle if not line.startswith("#")))


def test_worked_examples(reference_data, validation):
    rows = _examples(reference_data)
    assert {r["id"] for r in rows} >= {"curtis_example_6_10"}
    for row in rows:
        lat, inc, tol = (
            float(row[k]) for k in ("latitude_deg", "inclination_deg", "tolerance_deg")
        )
        expected = sorted((float(row["azimuth_a_deg"]), float(row["azimuth_b_deg"])))
        found = azimuths_for_inclination_deg(lat, inc)
        assert found is not None, row["id"]
        assert sorted(found) == pytest.approx(expected, abs=tol), f"{row['id']} ({row['tag']})"
        validation.record(
            f"launch azimuths for inclination {inc:g} deg from latitude {lat:g} deg "
            f"({row['id']}): largest difference",
            source=row["source"],
            tag=row["tag"],
            measured=float(np.abs(np.subtract(sorted(found), expected)).max()),
            tolerance=tol,
            unit="deg",
            note=row["tolerance_reason"],
        )
        for az in found:  # and back: each azimuth gives the inclination
            assert float(inclination_deg(lat, az)) == pytest.approx(inc, abs=1e-9), row["id"]


def test_due_east_gives_the_lowest_inclination_equal_to_the_latitude():
    for lat in (-45.0, -5.2, 0.0, 13.4, 28.5, 62.0):
        azimuths = np.linspace(0.0, 360.0, 36001)
        inc = inclination_deg(lat, azimuths)
        assert inc.min() == pytest.approx(abs(lat), abs=1e-9)
        assert float(inclination_deg(lat, 90.0)) == pytest.approx(abs(lat), abs=1e-12)
        if lat:
            assert azimuths_for_inclination_deg(lat, abs(lat) - 0.1) is None  # below |φ|: none


@given(
    st.floats(-85.0, 85.0, allow_nan=False),
    st.floats(0.0, 360.0, allow_nan=False),
)
def test_the_rule_agrees_with_the_orbit_normal_built_from_vectors(lat, az):
    # Independent construction: the site, its local east and north, the velocity along the
    # azimuth; the inclination is the angle of r × v from the pole.
    phi = math.radians(lat)
    r = np.array([math.cos(phi), 0.0, math.sin(phi)])
    east = np.array([0.0, 1.0, 0.0])
    north = np.array([-math.sin(phi), 0.0, math.cos(phi)])
    v = math.sin(math.radians(az)) * east + math.cos(math.radians(az)) * north
    h = np.cross(r, v)
    expected = math.degrees(math.acos(max(-1.0, min(1.0, h[2] / np.linalg.norm(h)))))
    assert float(inclination_deg(lat, az)) == pytest.approx(expected, abs=1e-7)


@pytest.mark.parametrize(
    ("lat", "az_min", "az_max"),
    [
        (28.5, 35.0, 120.0),
        (31.2, 85.0, 115.0),
        (13.4, 70.0, 110.0),
        (-20.0, 100.0, 150.0),  # southern site, south-east azimuths only
        (40.0, 150.0, 210.0),  # through due south, retrograde-ish azimuths
        (5.0, 250.0, 290.0),  # westward: retrograde orbits only
        (62.0, 340.0, 380.0),  # a range through north
        (28.5, 0.0, 360.0),  # every azimuth
    ],
)
def test_reachable_inclinations_and_dla_against_a_sweep(lat, az_min, az_max):
    site = LaunchSite("s", lat, 0.0, az_min, az_max)
    azimuths = np.linspace(az_min, az_max, 200001)
    inc = inclination_deg(lat, azimuths)
    low, high = site.reachable_inclinations_deg
    assert low == pytest.approx(inc.min(), abs=1e-6)
    assert high == pytest.approx(inc.max(), abs=1e-6)
    # A plane of inclination i holds declinations up to min(i, 180 - i) in magnitude.
    assert site.max_reachable_dla_deg == pytest.approx(np.minimum(inc, 180.0 - inc).max(), abs=1e-6)


def test_the_largest_declination_a_range_of_inclinations_holds():
    assert max_declination_deg(28.5, 59.7) == 59.7
    assert max_declination_deg(80.0, 100.0) == 90.0
    assert max_declination_deg(120.0, 150.0) == pytest.approx(60.0)


def test_allowed_azimuths_wrap_through_north():
    site = LaunchSite("s", 60.0, 0.0, 340.0, 380.0)
    assert site.azimuth_allowed([350.0, 0.0, 19.9, 20.0]).all()
    assert not site.azimuth_allowed([21.0, 339.0, 180.0]).any()
