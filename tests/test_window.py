"""The window engine against independent computations, handbook values and limiting cases."""

from __future__ import annotations

import csv
import math

import numpy as np
import pytest
from reference_lambert import lambert_uv

from app.samples import load
from solver.constants import AU_KM, GM_SUN_KM3_S2, OBLIQUITY_J2000_RAD
from solver.ephemeris.states import states
from solver.ephemeris.timescales import jd_tdb_to_utc, utc_to_jd_tdb
from solver.errors import InputError
from solver.files.cache import GridCache
from solver.mechanics.kepler import propagate
from solver.reasons import Reason
from solver.window.case import parse_case
from solver.window.cell import select_arc, solve_cell
from solver.window.grid import compute_window
from solver.window.refine import refine_best

ECLIPTIC_POLE_ICRF = np.array([0.0, -math.sin(OBLIQUITY_J2000_RAD), math.cos(OBLIQUITY_J2000_RAD)])


@pytest.fixture(scope="module")
def vesper():
    case = load("vesper_venus_orbiter")
    return case, compute_window(case)


# ---------------------------------------------------------------------------------------------
# Cell by cell against astropy's ephemeris and a separately written Lambert solver


def test_grid_agrees_with_astropy_and_independent_lambert(vesper, validation):
    """Every sampled cell of the Vesper grid recomputed with astropy's built-in ephemeris
    (ERFA epv00 for the Earth, plan94 for Venus) and tests/reference_lambert.py.

    Tolerances follow the reference ephemeris, not our solver: plan94 places Venus within a few
    thousand km and 1 m/s of DE423 over 2031 (measured 2,400 km, 0.7 m/s), which moves v∞ by up
    to ~1 m/s, C3 by ~2 v∞ δv∞, and the asymptote angles by ~δv/v∞ rad.
    """
    from astropy.coordinates import get_body_barycentric_posvel, solar_system_ephemeris
    from astropy.time import Time

    _case, grid = vesper
    rows = np.arange(0, len(grid.departure_jd_tdb), 11)
    cols = np.arange(0, len(grid.arrival_jd_tdb), 15)

    def helio(body, jd):
        t = Time(jd, format="jd", scale="tdb")
        with solar_system_ephemeris.set("builtin"):
            p, v = get_body_barycentric_posvel(body, t)
            ps, vs = get_body_barycentric_posvel("sun", t)
        return ((p - ps).xyz.to("km").value.T, (v - vs).xyz.to("km/s").value.T)

    r_dep, v_dep = helio("earth", grid.departure_jd_tdb[rows])
    r_arr, v_arr = helio("venus", grid.arrival_jd_tdb[cols])
    checked = 0
    worst_vinf = 0.0
    for a, i in enumerate(rows):
        for b, j in enumerate(cols):
            tof_s = (grid.arrival_jd_tdb[j] - grid.departure_jd_tdb[i]) * 86400.0
            if tof_s < 20 * 86400.0 or grid.reason[i, j, 0] != Reason.OK:
                continue
            angle = grid.transfer_angle_deg[i, j]
            if abs(angle - 180.0) < 3.0:  # near 180 degrees both sides are ill-conditioned
                continue
            v1, v2 = lambert_uv(r_dep[a], r_arr[b], tof_s, GM_SUN_KM3_S2, ECLIPTIC_POLE_ICRF)
            vinf_d = v1 - v_dep[a]
            vinf_a = v2 - v_arr[b]
            vd = np.linalg.norm(vinf_d)
            va = np.linalg.norm(vinf_a)
            ours = {k: grid.arcs[k][i, j, 0] for k in grid.arcs}
            tol_v = 2e-3 + 1e-4 * vd  # km/s
            assert ours["vinf_departure_km_s"] == pytest.approx(vd, abs=tol_v)
            assert ours["vinf_arrival_km_s"] == pytest.approx(va, abs=tol_v)
            worst_vinf = max(
                worst_vinf,
                abs(ours["vinf_departure_km_s"] - vd),
                abs(ours["vinf_arrival_km_s"] - va),
            )
            assert ours["c3_km2_s2"] == pytest.approx(vd**2, abs=2 * vd * tol_v)
            tol_angle = math.degrees(tol_v / min(vd, va)) + 0.01
            dla = math.degrees(math.asin(vinf_d[2] / vd))
            assert ours["dla_deg"] == pytest.approx(dla, abs=tol_angle)
            rla = math.degrees(math.atan2(vinf_d[1], vinf_d[0])) % 360.0
            assert abs((ours["rla_deg"] - rla + 180.0) % 360.0 - 180.0) <= tol_angle / max(
                math.cos(math.radians(dla)), 0.05
            )
            checked += 1
    assert checked > 100
    validation.record(
        f"Vesper grid, {checked} cells: departure and arrival v∞ against astropy's built-in "
        "ephemeris and an independent universal-variable Lambert solver",
        source="astropy (ERFA epv00, plan94) and tests/reference_lambert.py",
        tag="independent library",
        measured=worst_vinf,
        tolerance=2e-3,
        unit="km/s",
        note="the tolerance follows plan94's error for Venus (2,400 km, 0.7 m/s over 2031)",
    )


def test_grid_cells_equal_single_arc_solutions(vesper):
    """The grid and the single-arc path (used by the dashboard and exports) agree exactly."""
    case, grid = vesper
    for i, j in [(10, 120), (70, 150), (120, 200)]:
        arc = solve_cell(case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j])[0]
        for name, value in arc.metrics.items():
            if name != "tof_days" and np.isfinite(value):
                assert grid.arcs[name][i, j, 0] == pytest.approx(value, rel=1e-12, abs=1e-12)


# ---------------------------------------------------------------------------------------------
# Published values


def _rows(reference_dir, name):
    with open(reference_dir / name, newline="") as handle:
        return list(csv.DictReader(handle))


def _venus_case(start, end, tof_max=450):
    return parse_case(f"""
[case]
title = "Earth to Venus {start}"
central_body = "sun"
departure_body = "earth"
target_body = "venus"
[window]
departure_start = "{start}"
departure_end = "{end}"
departure_step_days = 2
arrival_start = "{start}"
arrival_end = "{jd_tdb_to_utc(float(utc_to_jd_tdb(end)) + tof_max, digits=0)[:10]}"
arrival_step_days = 2
[limits]
tof_min_days = 50
tof_max_days = {tof_max}
""")


def test_venus_minimum_c3_against_handbook(reference_data, validation):
    """Lowest launch energy of each Earth-Venus opportunity against JPL Publication 82-43,
    Vol. I Part 1 (values [SECONDARY], see the data file for the tolerance's reasons)."""
    for row in _rows(reference_data, "venus_minimum_c3.csv"):
        case = _venus_case(row["search_start"], row["search_end"])
        refined = refine_best(case, compute_window(case), "c3_km2_s2")
        expected = float(row["min_c3_km2_s2"])
        ours = refined.arc.metrics["c3_km2_s2"]
        print(
            f"{row['opportunity']}: ours {ours:.3f}, handbook {expected:.3f} "
            f"({100 * (ours / expected - 1):+.2f} %)"
        )
        assert ours == pytest.approx(expected, rel=float(row["tolerance_rel"])), row["opportunity"]
        validation.record(
            f"Lowest Earth-Venus C3 of the {row['opportunity']} opportunity",
            source=row["source"],
            tag=row["tag"],
            measured=abs(ours / expected - 1.0),
            tolerance=float(row["tolerance_rel"]),
            unit="relative",
            note=f"ours {ours:.3f}, handbook {expected:.3f} km²/s²",
        )


def test_venus_best_c3_dates_near_flown_missions(reference_data, validation):
    """The minimum-C3 dates of two opportunities lie near the launch and arrival dates of
    missions that flew them (dates [MEMORY]; see the data file)."""
    for row in _rows(reference_data, "venus_mission_dates.csv"):
        case = _venus_case(row["search_start"], row["search_end"])
        arc = refine_best(case, compute_window(case), "c3_km2_s2").arc
        launch = float(utc_to_jd_tdb(row["launch_utc"]))
        arrival = float(utc_to_jd_tdb(row["arrival_utc"]))
        tol = float(row["tolerance_days"])
        assert abs(arc.departure_jd_tdb - launch) <= tol, row["mission"]
        assert abs(arc.arrival_jd_tdb - arrival) <= tol, row["mission"]
        validation.record(
            f"{row['mission']}: minimum-C3 launch and arrival dates against the flown ones",
            source="flown mission dates (tests/reference_data/venus_mission_dates.csv)",
            tag=row["tag"],
            measured=max(abs(arc.departure_jd_tdb - launch), abs(arc.arrival_jd_tdb - arrival)),
            tolerance=tol,
            unit="days",
        )


def test_curtis_earth_mars_example_with_mean_elements(validation):
    """Curtis, Example 8.8 (edition-dependent numbering) [MEMORY]: Earth 1996-11-07 to Mars
    1997-09-12, v∞ 3.1651 km/s leaving and 2.8852 km/s arriving with the book's mean elements;
    with the Standish 1800-2050 set we use [COMPUTED in docs/references.md 1.2] 3.16566 and 2.88519.
    Tolerance 1e-3 km/s: the two element sets differ by about 0.5 m/s here."""
    case = parse_case("""
[case]
title = "Curtis example"
central_body = "sun"
departure_body = "earth"
target_body = "mars"
[window]
departure_start = "1996-11-07"
departure_end = "1996-11-07"
arrival_start = "1997-09-12"
arrival_end = "1997-09-12"
[ephemeris]
source = "mean"
""")
    arc = solve_cell(case, case.departure_start_jd_tdb, case.arrival_start_jd_tdb)[0]
    assert arc.metrics["vinf_departure_km_s"] == pytest.approx(3.16566, abs=1e-3)
    assert arc.metrics["vinf_arrival_km_s"] == pytest.approx(2.88519, abs=1e-3)
    assert arc.transfer_angle_deg == pytest.approx(219.66, abs=0.05)  # [COMPUTED] Type II
    validation.record(
        "Curtis's Earth-Mars example (1996-11-07 to 1997-09-12), mean elements: v∞ leaving and "
        "arriving",
        source="Curtis, Orbital Mechanics for Engineering Students, Example 8.8 "
        "(docs/references.md 1.2)",
        tag="[MEMORY], [COMPUTED]",
        measured=max(
            abs(arc.metrics["vinf_departure_km_s"] - 3.16566),
            abs(arc.metrics["vinf_arrival_km_s"] - 2.88519),
        ),
        tolerance=1e-3,
        unit="km/s",
    )


# ---------------------------------------------------------------------------------------------
# Hohmann limit with invented circular coplanar bodies


def test_hohmann_limit_between_circular_bodies(validation):
    """Between circular coplanar orbits, the least C3 that reaches the outer orbit is the
    Hohmann transfer's, and it arrives with the Hohmann arrival v∞ after half the transfer
    ellipse's period (common practice: vis-viva on a = (r1 + r2)/2)."""
    r1, r2 = 1.0 * AU_KM, 1.6 * AU_KM
    mu = GM_SUN_KM3_S2
    a_t = 0.5 * (r1 + r2)
    t_h = math.pi * math.sqrt(a_t**3 / mu)
    n1, n2 = math.sqrt(mu / r1**3), math.sqrt(mu / r2**3)
    epoch = float(utc_to_jd_tdb("2040-01-01"))
    depart = epoch + 40.0
    lead = math.pi - n2 * t_h  # outer body's lead at departure
    outer_m0 = math.degrees(lead + (n1 - n2) * (depart - epoch) * 86400.0) % 360.0
    arrive = depart + t_h / 86400.0
    case = parse_case(f"""
[case]
title = "Hohmann check"
central_body = "sun"
departure_body = "Inner"
target_body = "Outer"
[window]
departure_start = "{jd_tdb_to_utc(depart - 15, digits=0)}"
departure_end = "{jd_tdb_to_utc(depart + 15, digits=0)}"
departure_step_days = 1
arrival_start = "{jd_tdb_to_utc(arrive - 25, digits=0)}"
arrival_end = "{jd_tdb_to_utc(arrive + 25, digits=0)}"
arrival_step_days = 1
[arrival_orbit]
mode = "rendezvous"
[[bodies]]
name = "Inner"
epoch_jd_tdb = {epoch}
semi_major_axis_km = {r1}
eccentricity = 0.0
inclination_deg = 0.0
raan_deg = 0.0
arg_periapsis_deg = 0.0
mean_anomaly_deg = 0.0
[[bodies]]
name = "Outer"
epoch_jd_tdb = {epoch}
semi_major_axis_km = {r2}
eccentricity = 0.0
inclination_deg = 0.0
raan_deg = 0.0
arg_periapsis_deg = 0.0
mean_anomaly_deg = {outer_m0}
""")
    refined = refine_best(case, compute_window(case), "c3_km2_s2").arc
    v_dep = math.sqrt(mu * (2 / r1 - 1 / a_t)) - math.sqrt(mu / r1)
    v_arr = math.sqrt(mu / r2) - math.sqrt(mu * (2 / r2 - 1 / a_t))
    assert refined.metrics["c3_km2_s2"] == pytest.approx(v_dep**2, rel=1e-4)
    assert refined.metrics["vinf_arrival_km_s"] == pytest.approx(v_arr, rel=1e-3)
    assert refined.tof_days == pytest.approx(t_h / 86400.0, abs=1.0)
    assert refined.transfer_angle_deg == pytest.approx(180.0, abs=0.5)
    validation.record(
        "Hohmann limit between invented circular coplanar orbits: least C3",
        source="vis-viva on the Hohmann ellipse",
        tag="common practice",
        measured=abs(refined.metrics["c3_km2_s2"] / v_dep**2 - 1.0),
        tolerance=1e-4,
        unit="relative",
    )


# ---------------------------------------------------------------------------------------------
# Arcs meet the bodies; caching; reasons


def test_arc_end_points_are_the_bodies(vesper):
    case, grid = vesper
    i, j, _ = grid.best_cell("c3_km2_s2")
    arc = select_arc(solve_cell(case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j]))
    reg = case.registry()
    r_e, v_e = states("earth", arc.departure_jd_tdb, central="sun", registry=reg)
    r_v, _ = states("venus", arc.arrival_jd_tdb, central="sun", registry=reg)
    np.testing.assert_array_equal(arc.r1_km, r_e)
    np.testing.assert_array_equal(arc.r2_km, r_v)
    # propagated over the TDB interval of the epochs (tof_days is elapsed UTC time, ms apart)
    r_end, _ = propagate(arc.r1_km, arc.v1_km_s, arc.flight_s, arc.mu_km3_s2)
    assert np.linalg.norm(r_end - r_v) <= 1e-10 * np.linalg.norm(r_v)
    np.testing.assert_allclose(arc.v1_km_s - v_e, arc.v1_km_s - arc.departure_body_v_km_s, atol=0)


def test_cache_hit_is_bit_for_bit(tmp_path):
    case = load("kestrel_relay_leo")
    cache = GridCache(tmp_path)
    first = compute_window(case, cache=cache)
    second = compute_window(case, cache=cache)
    assert not first.from_cache and second.from_cache
    a, b = first.to_arrays(), second.to_arrays()
    assert a.keys() == b.keys()
    for name in a:
        assert a[name].dtype == b[name].dtype and a[name].shape == b[name].shape, name
        assert a[name].tobytes() == b[name].tobytes(), name
    assert second.provenance["case_hash"] == first.provenance["case_hash"]
    # a different case is a different entry
    other = case.with_changes(**{"limits.tof_min_days": 0.02})
    assert not compute_window(other, cache=cache).from_cache


def test_grids_cached_by_the_previous_engine_are_not_served(tmp_path, monkeypatch):
    """Engine 0.1.0 counted grid dates in TDB and reported TDB intervals as TOF: its cached
    grids hold other dates and numbers, so the current engine must not read them."""
    import solver.window.provenance as provenance

    case = load("kestrel_relay_leo")
    cache = GridCache(tmp_path)
    monkeypatch.setattr(provenance, "ENGINE_VERSION", "0.1.0")
    old = compute_window(case, cache=cache)
    assert compute_window(case, cache=cache).from_cache  # served to the same engine
    monkeypatch.undo()
    assert not old.from_cache
    assert not compute_window(case, cache=cache).from_cache


def test_cells_without_arcs_carry_reasons(vesper):
    _case, grid = vesper
    before = grid.tof_days <= 0
    assert before.any()
    assert np.all(grid.cell_reason()[before] == Reason.ARRIVAL_NOT_AFTER_DEPARTURE)
    assert np.all(np.isnan(grid.arcs["c3_km2_s2"][before]))
    assert not grid.cell_within()[before].any()


def test_multirevolution_grid_has_every_branch():
    case = load("kestrel_relay_leo")
    grid = compute_window(case)
    assert grid.shape[2] == 7
    for slot in range(7):
        assert grid.converged[..., slot].any(), slot
    best = grid.best_slot("dv_total_km_s")
    assert set(np.unique(best[best >= 0]).tolist()) - {0}, (
        "multi-revolution arcs must win somewhere"
    )


def test_limits_mask_respects_every_limit(vesper):
    case, grid = vesper
    lim = case.limits
    w = grid.within
    assert np.all(grid.arcs["c3_km2_s2"][w] <= lim.c3_max_km2_s2)
    assert np.all(grid.arcs["vinf_arrival_km_s"][w] <= lim.vinf_arrival_max_km_s)
    assert np.all(np.abs(grid.arcs["dla_deg"][w]) <= lim.dla_max_deg)
    tof = np.broadcast_to(grid.tof_days[..., None], w.shape)
    assert np.all((tof[w] >= lim.tof_min_days) & (tof[w] <= lim.tof_max_days))
    assert w.any() and (~w & grid.converged).any()


def test_grid_cap_refuses_huge_grids():
    case = load("vesper_venus_orbiter")
    with pytest.raises(InputError, match="cell-arcs"):
        compute_window(case, max_cells=1000)


def test_metrics_physics_spot_checks(vesper):
    """Departure Δv from the 200 km parking orbit and the capture Δv follow from v∞ by
    vis-viva (common practice), and the entry speed from energy conservation."""
    case, grid = vesper
    i, j, _ = grid.best_cell("c3_km2_s2")
    arc = select_arc(solve_cell(case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j]))
    reg = case.registry()
    earth, venus = reg.get("earth"), reg.get("venus")
    rp = earth.radius_km + 200.0
    vd = arc.metrics["vinf_departure_km_s"]
    assert arc.metrics["dv_departure_km_s"] == pytest.approx(
        math.sqrt(vd**2 + 2 * earth.gm_km3_s2 / rp) - math.sqrt(earth.gm_km3_s2 / rp), rel=1e-12
    )
    va = arc.metrics["vinf_arrival_km_s"]
    rp, ra = venus.radius_km + 300.0, venus.radius_km + 35000.0
    v_hyp = math.sqrt(va**2 + 2 * venus.gm_km3_s2 / rp)
    v_ell = math.sqrt(venus.gm_km3_s2 * (2 / rp - 2 / (rp + ra)))
    assert arc.metrics["dv_arrival_km_s"] == pytest.approx(v_hyp - v_ell, rel=1e-12)
    assert arc.metrics["entry_speed_km_s"] == pytest.approx(
        math.sqrt(va**2 + 2 * venus.gm_km3_s2 / (venus.radius_km + 125.0)), rel=1e-12
    )
    # DLA of an asymptote along the ecliptic pole is 90° - ε (docs/references.md 6 [MEMORY])
    from solver.window.case_bodies import CaseBodies
    from solver.window.metrics import arc_metrics

    bodies = CaseBodies.of(case)
    m = arc_metrics(
        case,
        bodies,
        arc.r1_km,
        ECLIPTIC_POLE_ICRF * 3.0,
        arc.v2_km_s,
        np.zeros(3),
        arc.arrival_body_v_km_s,
    )
    assert float(m["dla_deg"]) == pytest.approx(90.0 - math.degrees(OBLIQUITY_J2000_RAD), abs=1e-9)


@pytest.mark.parametrize(
    ("sample", "departure", "arrival"),
    [
        ("vesper_venus_orbiter", "200 km parking orbit", "300 × 35000 km capture orbit"),
        ("orrery_jupiter_flyby", "launch vehicle delivers the C3", "flyby, no burn"),
        ("kestrel_relay_leo", "|v∞|: one burn to leave", "match the target's velocity"),
    ],
)
def test_every_output_says_how_its_dv_is_counted(sample, departure, arrival):
    """A Δv of 0 (the launcher's share, a flyby) is stated as such wherever it is shown."""
    from solver.window.provenance import provenance

    prov = provenance(load(sample))
    assert departure in prov["departure_dv"]
    assert arrival in prov["arrival_dv"]
