"""Physical constants, in one place, each with its published source.

Tags follow docs/references.md: [FOUND: where], [SECONDARY: where], [MEMORY] (recalled,
not confirmed in the source), [COMPUTED].

Choice of source
----------------
* **GM values come from the DE423 file itself** (its header constants GMS, GM1..GM9, GMB and
  EMRAT, in au^3/day^2 with the file's own au), converted here to km^3/s^2. Using the same masses
  the ephemeris was integrated with keeps two-body arcs consistent with the positions we read from
  it. ``tests/test_constants.py`` re-derives every one of them from the installed file. The
  DE440 values (docs/references.md 4.1, [FOUND]) differ by at most a few parts in 1e6 (Uranus,
  Neptune, the Pluto system) and far less for the Sun and inner planets; they are listed in
  ``GM_DE440_KM3_S2`` for comparison only.
* **Radii** are not dynamical quantities of the ephemeris (the DE file's RAD1/RAD2/RAD4 are
  radar-ranging fit parameters, not body radii), so they come from the JPL SSD "Planets and Pluto:
  Physical Characteristics" table (docs/references.md 4.3) and IAU 2015 nominal values.
* **The astronomical unit** is the IAU 2012 Resolution B2 exact value. The DE423 file carries its
  own fitted au (149 597 870.6996 km), used only to convert its GM values.
* **The obliquity of the ecliptic at J2000** is the IAU 2006 (P03) value 84381.406 arcsec.
"""

from __future__ import annotations

import math

# ---------------------------------------------------------------------------------------------
# Lengths
# ---------------------------------------------------------------------------------------------
AU_KM = 149_597_870.7
"""Astronomical unit, km. IAU 2012 Resolution B2, exact
[FOUND: Astronomical Almanac constants 2017, K6, via docs/references.md 4.2]."""

DE423_AU_KM = 149_597_870.6996262
"""The au fitted in DE423 (header constant AU), km. Used only to convert the file's GM values."""

DE423_EMRAT = 81.30056941599857
"""Earth/Moon mass ratio from the DE423 header (constant EMRAT)."""

# ---------------------------------------------------------------------------------------------
# Obliquity
# ---------------------------------------------------------------------------------------------
OBLIQUITY_J2000_ARCSEC = 84381.406
"""Obliquity of the ecliptic at J2000, IAU 2006 (P03, Hilton et al. 2006)
[FOUND: SOFA/ERFA obl06, docs/references.md 4.4]."""
OBLIQUITY_J2000_DEG = OBLIQUITY_J2000_ARCSEC / 3600.0
OBLIQUITY_J2000_RAD = math.radians(OBLIQUITY_J2000_DEG)

OBLIQUITY_J2000_IAU1976_ARCSEC = 84381.448
"""Obliquity of the ecliptic at J2000, IAU 1976 (Lieske et al. 1977) [FOUND: docs/references.md
4.4]. The J2000 ecliptic of small-body element lists is commonly defined with this value (common
practice); it differs from the IAU 2006 value by 0.042 arcsec, which turns a body at 2.8 au by
up to ~85 km."""
OBLIQUITY_J2000_IAU1976_RAD = math.radians(OBLIQUITY_J2000_IAU1976_ARCSEC / 3600.0)

# ---------------------------------------------------------------------------------------------
# GM, km^3/s^2, from the DE423 header: GM[au^3/d^2] * DE423_AU_KM**3 / 86400**2
# (header name in brackets). Outer planets (and Mars) are SYSTEM values, planet plus moons,
# which matches the DE entries being system barycentres.
# ---------------------------------------------------------------------------------------------
GM_SUN_KM3_S2 = 132_712_440_040.9446  # [GMS]
GM_MERCURY_KM3_S2 = 22_031.855  # [GM1]
GM_VENUS_KM3_S2 = 324_858.592  # [GM2]
GM_EARTH_MOON_KM3_S2 = 403_503.2363095674  # [GMB], Earth + Moon
GM_EARTH_KM3_S2 = 398_600.4362539565  # GMB * EMRAT / (1 + EMRAT)
GM_MOON_KM3_S2 = 4_902.800055610911  # GMB / (1 + EMRAT)
GM_MARS_SYSTEM_KM3_S2 = 42_828.375214  # [GM4]
GM_JUPITER_SYSTEM_KM3_S2 = 126_712_764.8  # [GM5]
GM_SATURN_SYSTEM_KM3_S2 = 37_940_585.2  # [GM6]
GM_URANUS_SYSTEM_KM3_S2 = 5_794_548.6  # [GM7]
GM_NEPTUNE_SYSTEM_KM3_S2 = 6_836_535.0  # [GM8]
GM_PLUTO_SYSTEM_KM3_S2 = 977.0  # [GM9]

GM_DE440_KM3_S2: dict[str, float] = {
    # For comparison only; not used by the engine. Park et al. 2021 [FOUND: docs/references.md 4.1].
    "sun": 132_712_440_041.279419,
    "mercury": 22_031.868551,
    "venus": 324_858.592000,
    "earth": 398_600.435507,
    "moon": 4_902.800118,
    "mars": 42_828.375816,
    "jupiter": 126_712_764.100000,
    "saturn": 37_940_584.841800,
    "uranus": 5_794_556.400000,
    "neptune": 6_836_527.100580,
    "pluto": 975.500000,
}

# ---------------------------------------------------------------------------------------------
# Radii, km. Equatorial radius is the one used for altitudes (periapsis altitude = r_p - R_eq).
# ---------------------------------------------------------------------------------------------
RADIUS_SUN_KM = 695_700.0  # IAU 2015 Resolution B3 nominal solar radius [MEMORY]
# JPL SSD physical parameters, equatorial [FOUND: docs/references.md 4.3]
RADIUS_MERCURY_KM = 2_440.53  # JPL SSD, equatorial [FOUND: docs/references.md 4.3]
RADIUS_VENUS_KM = 6_051.8  # JPL SSD, equatorial [FOUND: docs/references.md 4.3]
RADIUS_EARTH_KM = 6_378.1366  # JPL SSD, equatorial [FOUND: docs/references.md 4.3]
RADIUS_MOON_KM = 1_737.4  # mean radius, IAU WGCCRE / JPL SSD [MEMORY]
RADIUS_MARS_KM = 3_396.19  # JPL SSD, equatorial [FOUND: docs/references.md 4.3]
RADIUS_JUPITER_KM = 71_492.0  # JPL SSD, equatorial (1 bar) [FOUND: docs/references.md 4.3]
RADIUS_SATURN_KM = 60_268.0  # JPL SSD, equatorial (1 bar) [FOUND: docs/references.md 4.3]
RADIUS_URANUS_KM = 25_559.0  # JPL SSD, equatorial (1 bar) [FOUND: docs/references.md 4.3]
RADIUS_NEPTUNE_KM = 24_764.0  # JPL SSD, equatorial (1 bar) [MEMORY: cut off in the stored copy]
RADIUS_PLUTO_KM = 1_188.3  # New Horizons mean radius, JPL SSD [MEMORY]

RADIUS_MEAN_KM: dict[str, float] = {
    # JPL SSD mean radii [FOUND: docs/references.md 4.3] except where tagged.
    "mercury": 2_439.4,
    "venus": 6_051.8,
    "earth": 6_371.0084,
    "mars": 3_389.50,
    "jupiter": 69_911.0,
    "saturn": 58_232.0,
    "uranus": 25_362.0,
    "neptune": 24_622.0,  # [MEMORY]
}

# ---------------------------------------------------------------------------------------------
# Mass and launch
# ---------------------------------------------------------------------------------------------
STANDARD_GRAVITY_M_S2 = 9.80665
"""Standard acceleration of gravity g0, m/s², exact by definition (3rd CGPM, 1901); the g0 of
the rocket equation Δv = Isp·g0·ln(m0/m1) [MEMORY, docs/references.md 11.1]."""
STANDARD_GRAVITY_KM_S2 = STANDARD_GRAVITY_M_S2 / 1000.0

EARTH_ROTATION_TURNS_PER_UT1_DAY = 1.00273781191135448
"""Rate of the Earth Rotation Angle, turns per UT1 day (IAU 2000 Resolution B1.8; the rate in
ERFA's ``era00``) [MEMORY; checked against ERFA era00 by tests/test_daily_window.py;
docs/references.md 11.4]."""
