"""Constants: re-derived from the DE423 file they cite, and compared with published values."""

from __future__ import annotations

import pytest

from solver import constants as c
from solver.ephemeris.de import JD_TDB_MAX, JD_TDB_MIN, ephemeris

GM_FROM_HEADER = [
    ("GMS", c.GM_SUN_KM3_S2),
    ("GM1", c.GM_MERCURY_KM3_S2),
    ("GM2", c.GM_VENUS_KM3_S2),
    ("GMB", c.GM_EARTH_MOON_KM3_S2),
    ("GM4", c.GM_MARS_SYSTEM_KM3_S2),
    ("GM5", c.GM_JUPITER_SYSTEM_KM3_S2),
    ("GM6", c.GM_SATURN_SYSTEM_KM3_S2),
    ("GM7", c.GM_URANUS_SYSTEM_KM3_S2),
    ("GM8", c.GM_NEPTUNE_SYSTEM_KM3_S2),
    ("GM9", c.GM_PLUTO_SYSTEM_KM3_S2),
]


@pytest.mark.parametrize(("header", "value"), GM_FROM_HEADER, ids=[h for h, _ in GM_FROM_HEADER])
def test_gm_matches_de423_header(header, value):
    eph = ephemeris()
    km3_s2 = getattr(eph, header) * eph.AU**3 / 86400.0**2
    assert value == pytest.approx(km3_s2, rel=1e-14)


def test_earth_moon_split_and_header_scalars():
    eph = ephemeris()
    assert c.DE423_EMRAT == eph.EMRAT
    assert c.DE423_AU_KM == eph.AU
    assert c.GM_EARTH_KM3_S2 / c.GM_MOON_KM3_S2 == pytest.approx(eph.EMRAT, rel=1e-14)
    assert c.GM_EARTH_KM3_S2 + c.GM_MOON_KM3_S2 == pytest.approx(c.GM_EARTH_MOON_KM3_S2, rel=1e-15)
    assert (JD_TDB_MIN, JD_TDB_MAX) == (eph.jalpha, eph.jomega)


@pytest.mark.parametrize("body", sorted(c.GM_DE440_KM3_S2))
def test_gm_close_to_de440(body):
    # DE440 values [FOUND: docs/references.md 4.1]; ephemerides a decade apart agree to a few ppm
    # (largest: Uranus 1.3e-6, Neptune 1.2e-6, Pluto system 1.5e-3, a poorly known mass then).
    ours = {
        "sun": c.GM_SUN_KM3_S2, "mercury": c.GM_MERCURY_KM3_S2, "venus": c.GM_VENUS_KM3_S2,
        "earth": c.GM_EARTH_KM3_S2, "moon": c.GM_MOON_KM3_S2, "mars": c.GM_MARS_SYSTEM_KM3_S2,
        "jupiter": c.GM_JUPITER_SYSTEM_KM3_S2, "saturn": c.GM_SATURN_SYSTEM_KM3_S2,
        "uranus": c.GM_URANUS_SYSTEM_KM3_S2, "neptune": c.GM_NEPTUNE_SYSTEM_KM3_S2,
        "pluto": c.GM_PLUTO_SYSTEM_KM3_S2,
    }[body]  # fmt: skip
    tolerance = 2e-3 if body == "pluto" else 2e-6
    assert ours == pytest.approx(c.GM_DE440_KM3_S2[body], rel=tolerance)


def test_published_scalars():
    assert c.AU_KM == 149_597_870.7  # IAU 2012 B2, exact [FOUND: docs/references.md 4.2]
    assert c.AU_KM - c.DE423_AU_KM == pytest.approx(0.0004, abs=0.0001)  # fitted au, 0.4 m off
    # IAU 2015 B3 nominal GM_sun 1.3271244e20 m^3/s^2 [FOUND: docs/references.md 4.2]: 8 digits.
    assert c.GM_SUN_KM3_S2 == pytest.approx(1.3271244e11, rel=1e-8)
    assert c.RADIUS_EARTH_KM == pytest.approx(6378.1366)  # [FOUND: docs/references.md 4.3]
