"""Sequences against missions and mission classes of the trade (slow: each is a real search).

* A flown gravity-assist sequence: the Venus-Earth-Earth flybys to Jupiter launched in 1989,
  rediscovered by a search over its launch year with our ephemeris (docs/references.md 8.4; the
  flown dates are recalled from memory).
* A flown Venus flyby to Mercury launched in 1973, every date (launch, Venus, Mercury)
  rediscovered within 15 days by a minimum-launch-energy search over its launch year
  (docs/references.md 8.7; the flown dates are recalled from memory).
* The two classes of Mars round trips (docs/references.md 8.5, common practice): a long stay of
  roughly 900-1000 days in all, and a short stay that costs markedly more.
* A sequence whose flybys must be unpowered gets flybys within the tolerance and above their
  lowest altitude.
"""

from __future__ import annotations

import numpy as np
import pytest

from solver.ephemeris.timescales import utc_to_jd_tdb
from solver.sequence.search import SearchSettings, search_case
from solver.sequence.spec import parse_sequence_case

# The flown dates, docs/references.md 8.4 [MEMORY]: launch 1989-10-18, Venus 1990-02-10, Earth
# 1990-12-08, Earth 1992-12-08, Jupiter arrival 1995-12-07.
FLOWN = ("1989-10-18", "1990-02-10", "1990-12-08", "1992-12-08", "1995-12-07")

# The mission as an analyst would set it up (its requirements recalled from memory): ballistic
# flybys, arrival at Jupiter by the end of 1995, and the propellant the mission spends on its two
# big burns as the cost: the departure burn from a 300 km parking orbit (the launch energy) plus
# the Jupiter orbit insertion into a stated capture orbit (periapsis 4 Jupiter radii, apoapsis
# 1.9e7 km, a first orbit of about 200 days). So: minimize the total Δv over the 1989 launch
# year, unpowered flybys (within 10 m/s). The two-year Earth-Earth leg is a 2:1 resonant return
# (docs/references.md 8.4).
VEEGA_1989 = """
[case]
title = "Venus-Earth-Earth gravity assists to Jupiter, 1989 launch year"
central_body = "sun"
departure_body = "earth"
target_body = "jupiter"

[window]
departure_start = "1989-01-01"
departure_end = "1989-12-31"
arrival_start = "1993-01-01"
arrival_end = "1995-12-31"

[departure_orbit]
altitude_km = 300

[arrival_orbit]
mode = "capture"
periapsis_altitude_km = 214476
apoapsis_altitude_km = 19000000

[sequence]
objective = "dv_total_km_s"
unpowered_only = true
unpowered_tolerance_km_s = 0.01

[[sequence.legs]]
to = "venus"
tof_min_days = 60
tof_max_days = 200

[[sequence.legs]]
to = "earth"
tof_min_days = 150
tof_max_days = 500

[[sequence.legs]]
to = "earth"
tof_min_days = 715
tof_max_days = 745
resonance = "2:1"

[[sequence.legs]]
tof_min_days = 700
tof_max_days = 1500
"""

# The flown dates, docs/references.md 8.7 [MEMORY]: launch 1973-11-03, Venus flyby 1974-02-05,
# Mercury encounter 1974-03-29.
FLOWN_1973 = ("1973-11-03", "1974-02-05", "1974-03-29")

# The 1973 Venus flyby to Mercury as an analyst would set it up from the mission's requirements
# (recalled from memory): one launch on a launch vehicle whose payload fell fast with launch
# energy, an unpowered Venus flyby, and Mercury passed at speed (no burn there). So the only
# propellant that depends on the trajectory is the launch energy: minimize the C3 over the whole
# 1973 launch year, unpowered flybys (within 10 m/s). The TOF bounds are broad (50-250 days to
# Venus, 30-250 days on to Mercury) and the arrival window spans two and a half years: no date
# or duration is taken from the flown mission.
VENUS_MERCURY_1973 = """
[case]
title = "Venus flyby to Mercury, 1973 launch year"
central_body = "sun"
departure_body = "earth"
target_body = "mercury"

[window]
departure_start = "1973-01-01"
departure_end = "1973-12-31"
arrival_start = "1973-01-01"
arrival_end = "1975-06-30"

[departure_orbit]
altitude_km = 185

[arrival_orbit]
mode = "flyby"

[sequence]
objective = "{objective}"
unpowered_only = true
unpowered_tolerance_km_s = 0.01

[[sequence.legs]]
to = "venus"
tof_min_days = 50
tof_max_days = 250

[[sequence.legs]]
tof_min_days = 30
tof_max_days = 250
"""

MARS_ROUND_TRIPS = """
[case]
title = "Mars round trips, 2033 opportunity"
central_body = "sun"
departure_body = "earth"
target_body = "earth"

[window]
departure_start = "2032-10-01"
departure_end = "2033-09-30"
arrival_start = "2033-06-01"
arrival_end = "2036-12-31"

[departure_orbit]
altitude_km = 400

[arrival_orbit]
mode = "flyby"
entry_altitude_km = 125

[[sequence]]
name = "long-stay"
[[sequence.legs]]
to = "mars"
kind = "stop"
tof_min_days = 120
tof_max_days = 400
stay_min_days = 300
stay_max_days = 700
periapsis_altitude_km = 500
[[sequence.legs]]
tof_min_days = 120
tof_max_days = 400

[[sequence]]
name = "short-stay"
duration_max_days = 650
[[sequence.legs]]
to = "mars"
kind = "stop"
tof_min_days = 80
tof_max_days = 400
stay_min_days = 30
stay_max_days = 90
periapsis_altitude_km = 500
[[sequence.legs]]
tof_min_days = 80
tof_max_days = 400
"""


@pytest.mark.slow
def test_the_flown_1989_venus_earth_earth_sequence_is_rediscovered(validation):
    """Dates within 15 days for the launch and the three flybys; the arrival within a month.

    What the model leaves out of the flown mission: the trajectory correction manoeuvres (and
    any deep-space manoeuvre), the planets' pulls on each other's legs (Jupiter's over the
    two-year orbit moves the spacecraft by the order of 1e6 km), finite spheres of influence,
    the launch period (set by the launch vehicle and operations, not by the minimum cost), the
    asteroid flybys on the way, and the resonant Earth-Earth leg flown as one exactly periodic
    orbit (the Earth is 0.48 deg further on after two years; the flown mission closed that gap
    with its manoeuvres).

    The arrival is not pinned by the cost: in this model the total Δv (like the C3 alone) keeps
    falling as the Jupiter leg lengthens, so the best arrival sits on the window's end, 1995-12-31,
    24 days after the flown date. What was measured in making this test: the best candidate
    arriving by the flown date costs 20 m/s more (4.681 against 4.662 km/s), and with no
    arrival window the best arrives some 95 days after it and costs 0.09 km/s less (C3 alone: 660
    days after). The flown arrival date was a requirement of the mission, not the Δv optimum of a
    two-body model; so the arrival is checked against the window and within a month.
    """
    sequence_case = parse_sequence_case(VEEGA_1989)
    found = search_case(
        sequence_case, SearchSettings(top=3, seed=1, restarts=8, population=20, generations=400)
    )
    best = found.candidates[0]
    assert best.within_limits, best.breaches
    flown = [float(utc_to_jd_tdb(t)) for t in FLOWN]
    misses = [abs(a - b) for a, b in zip(best.epochs_jd_tdb, flown, strict=True)]
    assert max(misses[:4]) <= 15.0, misses
    assert misses[4] <= 31.0, misses
    for name, miss, tolerance in zip(
        ("launch", "Venus flyby", "first Earth flyby", "second Earth flyby", "Jupiter arrival"),
        misses,
        (15.0, 15.0, 15.0, 15.0, 31.0),
        strict=True,
    ):
        validation.record(
            f"flown 1989 Venus-Earth-Earth sequence rediscovered: {name} date",
            source="the flown mission's dates (docs/references.md 8.4)",
            tag="MEMORY",
            measured=miss,
            tolerance=tolerance,
            unit="days",
            note="search over the 1989 launch year, minimum total Δv (departure burn and "
            "Jupiter orbit insertion), unpowered flybys",
        )
    assert best.epochs_jd_tdb[4] <= sequence_case.case.arrival_end_jd_tdb
    # Launch energy of the flown mission: C3 about 15-17 km²/s² [MEMORY]; Venus flyby at about
    # 16,000 km altitude [MEMORY]; the second Earth flyby at about 300 km [MEMORY].
    departure, venus, _earth1, earth2, _ = best.encounters
    assert 13.0 <= departure.c3_km2_s2 <= 18.0
    assert 10_000.0 <= venus.periapsis_altitude_km <= 25_000.0
    assert earth2.periapsis_altitude_km <= 1_000.0
    # Unpowered flybys: every burn and every speed mismatch within the tolerance, every
    # periapsis at or above its lowest altitude.
    for encounter in best.encounters[1:-1]:
        assert abs(encounter.vinf_out_km_s - encounter.vinf_in_km_s) <= 0.01
        assert encounter.dv_km_s <= 0.01
        assert encounter.periapsis_altitude_km >= encounter.altitude_min_km


@pytest.mark.slow
@pytest.mark.parametrize("objective", ["c3_km2_s2", "dv_total_km_s"])
def test_the_flown_1973_venus_flyby_to_mercury_is_rediscovered(validation, objective):
    """Every flown date within 15 days: launch, Venus flyby and Mercury encounter.

    The objective is what the mission would have minimized: the launch energy (one launch whose
    payload falls with C3, no burn at Venus or Mercury), or the same stated as the total Δv (the
    departure burn from a 185 km parking orbit, plus any flyby burn; nothing at Mercury). Both
    are searched over the whole 1973 launch year; the optimum is inside every bound, not on a
    window's edge, and the cost rises on every side of it (docs/references.md 8.7: launching
    15 days earlier or later costs 1.3 or 2.5 km²/s² more; arriving at Mercury 15 days earlier
    costs 1.3 km²/s² more, and 15 days later needs the next opportunity).

    What the model leaves out of the flown mission (from memory): the trajectory correction
    manoeuvres on the way (there were no large deep-space manoeuvres to leave out), the aim
    point at Mercury (the model reaches Mercury's centre; the orbit after the flown pass, about
    700 km up, returned to Mercury twice more, which the model does not ask for), the Venus
    flyby's altitude as flown (about 5,770 km; the model's flyby, at about 2,750 km, is whatever
    turns the v∞ onto the model's Mercury leg), the planets' pulls on each other's legs, finite
    spheres of influence and the launch period set by operations.
    """
    sequence_case = parse_sequence_case(VENUS_MERCURY_1973.format(objective=objective))
    found = search_case(sequence_case, SearchSettings(top=3, seed=1))
    best = found.candidates[0]
    assert best.within_limits, best.breaches
    flown = [float(utc_to_jd_tdb(t)) for t in FLOWN_1973]
    misses = [abs(a - b) for a, b in zip(best.epochs_jd_tdb, flown, strict=True)]
    assert max(misses) <= 15.0, misses
    for name, miss in zip(("launch", "Venus flyby", "Mercury encounter"), misses, strict=True):
        validation.record(
            f"flown 1973 Venus flyby to Mercury rediscovered ({objective}): {name} date",
            source="the flown mission's dates (docs/references.md 8.7)",
            tag="MEMORY",
            measured=miss,
            tolerance=15.0,
            unit="days",
            note=f"search over the 1973 launch year, minimum {objective}, unpowered Venus "
            "flyby, Mercury passed without a burn",
        )
    # The optimum is not held by a bound: each date and each TOF is well inside its window.
    window = sequence_case.case
    assert window.departure_start_jd_tdb + 30 < best.epochs_jd_tdb[0]
    assert best.epochs_jd_tdb[0] < window.departure_end_jd_tdb - 30
    for leg, tof in zip(sequence_case.sequences[0].legs, np.diff(best.epochs_jd_tdb), strict=True):
        assert leg.tof_min_days + 15 < tof < leg.tof_max_days - 15
    # An unpowered Venus flyby above its lowest altitude, as flown.
    venus = best.encounters[1]
    assert abs(venus.vinf_out_km_s - venus.vinf_in_km_s) <= 0.01
    assert venus.dv_km_s <= 0.01
    assert venus.periapsis_altitude_km >= venus.altitude_min_km


@pytest.mark.slow
def test_mars_round_trips_show_the_long_and_short_stay_classes(validation):
    """Common practice (docs/references.md 8.5): the conjunction (long-stay) class stays about
    450-550 days and takes about 900-1000 days in all at the lowest Δv; the opposition
    (short-stay) class stays 30-90 days, takes about 400-650 days, and costs markedly more.
    Checked: the long stay's total within 880-1020 days and its stay within 400-650 days; the
    short stay's total at most 650 days and its Δv at least 1 km/s above the long stay's."""
    sequence_case = parse_sequence_case(MARS_ROUND_TRIPS)
    found = search_case(sequence_case, SearchSettings(top=6, seed=0))
    best = {}
    for candidate in found.candidates:
        best.setdefault(candidate.sequence, candidate)
    long_stay, short_stay = best["long-stay"], best["short-stay"]
    assert long_stay.within_limits and short_stay.within_limits
    assert found.candidates[0].sequence == "long-stay"  # the cheaper class ranks first
    assert 880.0 <= long_stay.duration_days <= 1020.0
    assert 400.0 <= long_stay.encounters[1].stay_days <= 650.0
    assert short_stay.duration_days <= 650.0
    assert 30.0 <= short_stay.encounters[1].stay_days <= 90.0
    assert short_stay.dv_total_km_s >= long_stay.dv_total_km_s + 1.0
    validation.record(
        "Mars round trip, long-stay class: total duration (900-1000 days)",
        source="docs/references.md 8.5",
        tag="common practice",
        measured=long_stay.duration_days,
        tolerance=1020.0,
        unit="days",
        note=f"stay {long_stay.encounters[1].stay_days:.0f} d, {long_stay.dv_total_km_s:.2f} km/s",
    )
    validation.record(
        "Mars round trip, short-stay class: Δv above the long stay's",
        source="docs/references.md 8.5",
        tag="common practice",
        measured=short_stay.dv_total_km_s - long_stay.dv_total_km_s,
        tolerance=1.0,
        unit="km/s",
        note=f"{short_stay.duration_days:.0f} days in all (at least 1 km/s more required)",
    )
