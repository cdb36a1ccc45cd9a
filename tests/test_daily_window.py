"""The daily launch window against a brute-force search written here, independently.

The brute force steps through the UTC day in one-second steps. At each second it places the site
in the celestial frame with ERFA's full celestial-to-terrestrial matrix (IAU 2000B, ``c2t00b``:
not the solver's intermediate-frame-plus-rotation-angle shortcut), builds the plane through the
Earth's centre, the site and the asymptote for each sense of motion, and tests the launch
azimuth (the in-plane velocity's heading against the site's local north and east) against the
site's range directly. Openings and closings of the solver (found in closed form) must match
the brute force's to within its one-second step. Sources: docs/references.md 11.3, 11.4.
"""

from __future__ import annotations

import math

import erfa
import numpy as np
import pytest

from solver.constants import EARTH_ROTATION_TURNS_PER_UT1_DAY
from solver.launch.daily_window import daily_launch_window, unit_vector_icrf
from solver.launch.site import LaunchSite

MU_EARTH_KM3_S2 = 398600.4362539565
PARKING_RADIUS_KM = 6378.1366 + 200.0
DAY = 2462870.5  # 2031-01-04T00:00:00 UTC
STEP_S = 1.0
MODEL_S = 0.02


def _celestial_to_terrestrial(day_jd_utc: float, fraction: np.ndarray) -> np.ndarray:
    """(n, 3, 3) matrices, ERFA IAU 2000B, UT1 = UTC, no polar motion (as the model states)."""
    jd1 = np.full(fraction.shape, day_jd_utc)
    tai1, tai2, _ = erfa.ufunc.utctai(jd1, fraction)
    tt1, tt2, _ = erfa.ufunc.taitt(tai1, tai2)
    return erfa.c2t00b(tt1, tt2, jd1, fraction, 0.0, 0.0)


def _site_frame(site: LaunchSite, c2t: np.ndarray):
    """Site unit vector, local east and north, all in the celestial frame, per instant."""
    phi, lam = math.radians(site.latitude_deg), math.radians(site.longitude_deg)
    site_itrs = np.array(
        [math.cos(phi) * math.cos(lam), math.cos(phi) * math.sin(lam), math.sin(phi)]
    )
    r = np.einsum("nji,j->ni", c2t, site_itrs)  # transpose: terrestrial -> celestial
    pole = c2t[:, 2, :]
    east = np.cross(pole, r)
    east /= np.linalg.norm(east, axis=1)[:, None]
    north = np.cross(r, east)
    return r, east, north


def brute_force_window(site: LaunchSite, day_jd_utc: float, s_icrf: np.ndarray):
    """{direction: [(first second inside, last second inside), ...]} over the UTC day."""
    seconds = np.arange(0.0, 86400.0 + STEP_S, STEP_S)
    c2t = _celestial_to_terrestrial(day_jd_utc, seconds / 86400.0)
    r, east, north = _site_frame(site, c2t)
    found = {}
    for direction, sense in (("toward", 1.0), ("away", -1.0)):
        h = sense * np.cross(r, s_icrf)  # the orbit plane through the site and the asymptote
        v = np.cross(h, r)  # direction of motion at the site
        azimuth = np.degrees(np.arctan2((v * east).sum(1), (v * north).sum(1))) % 360.0
        offset = (azimuth - site.azimuth_min_deg) % 360.0
        inside = offset <= site.azimuth_max_deg - site.azimuth_min_deg
        runs, start = [], None
        for k, flag in enumerate(inside):
            if flag and start is None:
                start = k
            if not flag and start is not None:
                runs.append((seconds[start], seconds[k - 1]))
                start = None
        if start is not None:
            runs.append((seconds[start], seconds[-1]))
        found[direction] = runs
    return found


CASES = {
    # id: (site, DLA, RLA) on 2031-01-04
    "two_senses": (LaunchSite("a", 28.5, -80.6, 35.0, 120.0), 10.0, 120.0),
    "split_in_two": (LaunchSite("b", 28.5, -80.6, 35.0, 55.0), 40.0, 200.0),
    "one_swing": (LaunchSite("c", 28.5, -80.6, 35.0, 120.0), 40.0, 200.0),
    "vanishes": (LaunchSite("d", 28.5, -80.6, 35.0, 120.0), 62.0, 300.0),
    "southern_site": (LaunchSite("e", -7.9, 14.4, 60.0, 140.0), -25.0, 300.0),
    "through_north": (LaunchSite("f", 62.0, 40.0, 340.0, 380.0), 70.0, 45.0),
    "near_equator": (LaunchSite("g", 2.0, -52.0, 80.0, 100.0), 1.5, 10.0),
    "demo_site": (LaunchSite("Marram Point", 31.2, -78.4, 85.0, 115.0), 12.43, 144.66),
}


def _solver(site, dla, rla):
    return daily_launch_window(
        site,
        DAY,
        dla,
        rla,
        3.0,
        mu_km3_s2=MU_EARTH_KM3_S2,
        parking_radius_km=PARKING_RADIUS_KM,
    )


@pytest.mark.slow
@pytest.mark.parametrize("name", list(CASES))
def test_openings_and_closings_match_a_one_second_brute_force(name, validation):
    site, dla, rla = CASES[name]
    window = _solver(site, dla, rla)
    brute = brute_force_window(site, DAY, unit_vector_icrf(dla, rla))
    ours = {
        direction: [
            ((o.open_jd_utc - DAY) * 86400.0, (o.close_jd_utc - DAY) * 86400.0)
            for o in window.openings
            if o.direction == direction
        ]
        for direction in ("toward", "away")
    }
    worst = 0.0
    for direction in ("toward", "away"):
        assert len(ours[direction]) == len(brute[direction]), (name, direction, ours, brute)
        for (t_open, t_close), (b_open, b_close) in zip(
            sorted(ours[direction]), sorted(brute[direction]), strict=True
        ):
            # The brute force's first second inside is at most one step after the opening, its
            # last second inside at most one step before the closing; MODEL_S allows for the two
            # Earth-orientation models (IAU 2000B matrix each second against the day's
            # intermediate frame turned at the rotation angle), which differ by milliseconds.
            assert -MODEL_S <= b_open - t_open <= STEP_S + MODEL_S, (
                name,
                direction,
                t_open,
                b_open,
            )
            assert -MODEL_S <= t_close - b_close <= STEP_S + MODEL_S, (name, direction, t_close)
            ends = [(b_open - t_open, t_open > 0.0), (t_close - b_close, t_close < 86400.0)]
            worst = max([worst, *(abs(d) for d, inner in ends if inner)])
    validation.record(
        f"daily launch window, case {name}: openings and closings against a one-second search",
        source="brute force written in the test: ERFA c2t00b each second, azimuth from vectors "
        "(docs/references.md 11.3, 11.4)",
        tag="COMPUTED",
        measured=worst,
        tolerance=STEP_S + MODEL_S,
        unit="s",
        note="the search finds each end to its one-second step",
    )


@pytest.mark.slow
def test_the_window_vanishes_beyond_the_reach_and_splits_where_the_range_cuts_the_swing():
    site, dla, rla = CASES["vanishes"]
    assert abs(dla) > site.max_reachable_dla_deg  # 62 > 59.73 deg
    window = _solver(site, dla, rla)
    assert not window.reachable and window.openings == ()
    # |δ| > |φ|: the bearing swings out to its largest azimuth and back once a day. The range
    # 35-55 deg stops short of the swing's turning point (60.6 deg, where i = |δ|): two
    # openings, both toward the asymptote, one rising through the range and one falling.
    split = _solver(*CASES["split_in_two"])
    assert [o.direction for o in split.openings] == ["toward", "toward"]
    first, second = split.openings
    assert (first.azimuth_open_deg, first.azimuth_close_deg) == pytest.approx((35.0, 55.0))
    assert (second.azimuth_open_deg, second.azimuth_close_deg) == pytest.approx((55.0, 35.0))
    assert second.open_jd_utc > first.close_jd_utc
    # With the whole swing in range (35-120 deg) the two join into one opening.
    whole = [o for o in _solver(*CASES["one_swing"]).openings if o.direction == "toward"]
    assert len(whole) == 1
    assert whole[0].open_jd_utc == pytest.approx(first.open_jd_utc, abs=1e-9)
    assert whole[0].close_jd_utc == pytest.approx(second.close_jd_utc, abs=1e-9)


@pytest.mark.slow
@pytest.mark.parametrize("name", ["two_senses", "southern_site", "demo_site"])
def test_azimuth_inclination_and_coast_at_each_end_from_vectors(name):
    """At each opening's exact ends: the azimuth is an end of the range (or the day's edge),
    the inclination follows cos i = cos φ sin Az, and the coast is the angle, in the sense of
    motion, from the site to the perigee of the departure hyperbola, built from vectors."""
    site, dla, rla = CASES[name]
    window = _solver(site, dla, rla)
    s = unit_vector_icrf(dla, rla)
    e = 1.0 + PARKING_RADIUS_KM * 3.0**2 / MU_EARTH_KM3_S2
    theta_inf = math.acos(-1.0 / e)
    n_rad_s = math.sqrt(MU_EARTH_KM3_S2 / PARKING_RADIUS_KM**3)
    assert window.openings
    for o in window.openings:
        ends = (
            (
                o.open_jd_utc,
                o.azimuth_open_deg,
                o.inclination_open_deg,
                o.coast_open_deg,
                o.coast_open_min,
                o.opens_at_day_start,
            ),
            (
                o.close_jd_utc,
                o.azimuth_close_deg,
                o.inclination_close_deg,
                o.coast_close_deg,
                o.coast_close_min,
                o.closes_at_day_end,
            ),
        )
        for jd, azimuth, inclination, coast_deg, coast_min, at_edge in ends:
            c2t = _celestial_to_terrestrial(DAY, np.array([jd - DAY]))
            r, east, north = (x[0] for x in _site_frame(site, c2t))
            h = np.cross(r, s) * (1.0 if o.direction == "toward" else -1.0)
            h /= np.linalg.norm(h)
            v = np.cross(h, r)
            az = math.degrees(math.atan2(v @ east, v @ north)) % 360.0
            assert az == pytest.approx(azimuth % 360.0, abs=2e-3)
            if not at_edge:
                ends_of_range = (site.azimuth_min_deg % 360.0, site.azimuth_max_deg % 360.0)
                assert min(abs(az - a) for a in ends_of_range) < 2e-3
            lat = math.radians(site.latitude_deg)
            assert inclination == pytest.approx(
                math.degrees(math.acos(math.cos(lat) * math.sin(math.radians(az)))), abs=2e-3
            )
            perigee = math.cos(theta_inf) * s - math.sin(theta_inf) * np.cross(h, s)
            angle = math.degrees(math.atan2(np.cross(r, perigee) @ h, r @ perigee)) % 360.0
            assert coast_deg == pytest.approx(angle, abs=2e-3)
            assert coast_min == pytest.approx(math.radians(coast_deg) / n_rad_s / 60.0, rel=1e-12)


def test_the_rotation_rate_is_erfas():
    """The constant the window turns the site with is the rate of ERFA's Earth Rotation Angle."""
    span = 1000.0
    turns = (erfa.era00(2462870.5 + span, 0.0) - erfa.era00(2462870.5, 0.0)) / (2.0 * math.pi)
    fraction = (EARTH_ROTATION_TURNS_PER_UT1_DAY - 1.0) * span % 1.0
    assert turns % 1.0 == pytest.approx(fraction, abs=1e-12)


def test_a_declination_of_date_just_inside_the_reach_opens_a_window_and_just_outside_none():
    site = LaunchSite("s", 28.5, -80.6, 35.0, 120.0)
    reach = site.max_reachable_dla_deg
    probe = _solver(site, reach, 75.0)
    shift = probe.declination_of_date_deg - reach  # precession since J2000 moves declinations
    assert abs(shift) < 0.3
    inside = _solver(site, reach - shift - 0.05, 75.0)
    outside = _solver(site, reach - shift + 0.05, 75.0)
    assert inside.reachable and inside.openings
    assert not outside.reachable and not outside.openings
