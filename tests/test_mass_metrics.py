"""Mass metrics of every cell and arc, the minimum-mass limit, the launch site's reach, best
arcs and launch periods by delivered mass, and the exports that carry them.

Masses are recomputed here independently: scipy's PchipInterpolator on the case's table and the
rocket equation written out (docs/references.md 11.1, 11.2).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest
from scipy.interpolate import PchipInterpolator

from app.samples import load
from solver.errors import InputError
from solver.files.export import arc_json, write_grid
from solver.reasons import MassReason
from solver.window.arc_launch import arc_launch_window, mass_budget, vehicle_comparison
from solver.window.case import case_from_dict, parse_case, to_toml_dict
from solver.window.case_bodies import CaseBodies
from solver.window.cell import select_arc, solve_cell
from solver.window.grid import compute_window
from solver.window.launch_period import launch_period
from solver.window.limits import breach_text
from solver.window.mass import mass_reasons
from solver.window.refine import refine_best

G0_KM_S2 = 9.80665e-3


def coarse(name: str, step: float = 5.0):
    case = load(name)
    return case.with_changes(
        **{
            "window.departure_step_days": max(step, case.departure_step_days),
            "window.arrival_step_days": max(step, case.arrival_step_days),
        }
    )


@pytest.fixture(scope="module")
def vesper():
    case = coarse("vesper_venus_orbiter", 3.0)
    return case, compute_window(case)


@pytest.fixture(scope="module")
def orrery():
    case = coarse("orrery_jupiter_flyby", 6.0)
    return case, compute_window(case)


def _expected_injected(case, c3):
    vehicle = case.mass.vehicle
    curve = PchipInterpolator(vehicle.c3_km2_s2, vehicle.mass_kg, extrapolate=False)(c3)
    capability = curve * (1.0 - vehicle.margin_fraction) - vehicle.adapter_kg
    return np.minimum(capability, case.mass.wet_mass_max_kg)


def test_grid_masses_follow_the_table_and_the_rocket_equation(vesper, validation):
    case, grid = vesper
    ok = grid.converged
    c3 = grid.arcs["c3_km2_s2"][ok]
    injected = _expected_injected(case, c3)
    np.testing.assert_allclose(grid.arcs["injected_mass_kg"][ok], injected, rtol=1e-12)
    isp = case.mass.isp_s("arrival")
    dv = grid.arcs["dv_arrival_km_s"][ok]
    delivered = injected * np.exp(-dv / (isp * G0_KM_S2))
    np.testing.assert_allclose(grid.arcs["delivered_mass_kg"][ok], delivered, rtol=1e-12)
    validation.record(
        "grid delivered mass against scipy's PCHIP and the rocket equation written out",
        source="scipy.interpolate.PchipInterpolator; Δv = Isp·g0·ln(m0/m1) (docs/references.md "
        "11.1, 11.2)",
        tag="independent library",
        measured=float(np.nanmax(np.abs(grid.arcs["delivered_mass_kg"][ok] / delivered - 1.0))),
        tolerance=1e-12,
        unit="relative",
    )
    np.testing.assert_allclose(
        grid.arcs["propellant_arrival_kg"][ok], injected - delivered, rtol=1e-9
    )
    # The launch vehicle makes the departure burn: no spacecraft propellant for it (where the
    # vehicle's table reaches the C3; beyond it there is no mass at all).
    has_mass = np.isfinite(injected)
    assert has_mass.any() and (c3[~has_mass] > 60.0).all()
    assert (grid.arcs["propellant_departure_kg"][ok][has_mass] == 0.0).all()
    assert np.isnan(grid.arcs["propellant_departure_kg"][ok][~has_mass]).all()
    np.testing.assert_allclose(
        grid.arcs["mass_margin_kg"][ok],
        delivered - case.mass.required_delivered_mass_kg,
        rtol=1e-9,
        atol=1e-9,
    )
    assert np.isnan(grid.arcs["delivered_mass_kg"][~ok]).all()


def test_a_single_arc_has_the_grid_cells_masses(vesper):
    case, grid = vesper
    i, j, k = grid.best_cell("delivered_mass_kg")
    (arc,) = [a for a in solve_cell(case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j]) if a.ok]
    for name in ("injected_mass_kg", "delivered_mass_kg", "propellant_arrival_kg"):
        assert arc.metrics[name] == pytest.approx(float(grid.arcs[name][i, j, k]), rel=1e-12)


def test_no_vehicle_and_no_wet_mass_gives_nan_with_a_reason():
    case = coarse("survey_base", 20.0)
    grid = compute_window(case)
    for name in ("injected_mass_kg", "propellant_arrival_kg", "delivered_mass_kg"):
        assert np.isnan(grid.arcs[name]).all()
    codes = mass_reasons(
        case,
        CaseBodies.of(case),
        grid.arcs["c3_km2_s2"],
        grid.arcs["dv_departure_km_s"],
        grid.arcs["dv_arrival_km_s"],
    )
    assert set(np.unique(codes[grid.converged])) == {MassReason.NO_MASS_GIVEN}
    assert set(np.unique(codes[~grid.converged])) <= {MassReason.NO_ARC}


def test_c3_above_the_table_gives_no_mass_with_a_reason(orrery):
    case, _ = orrery
    corvid = case.with_changes(**{"spacecraft.vehicle": "Corvid 2"})  # its table ends at C3 60
    grid = compute_window(corvid)
    c3 = grid.arcs["c3_km2_s2"]
    above = grid.converged & (c3 > 60.0)
    assert above.any() and np.isnan(grid.arcs["injected_mass_kg"][above]).all()
    codes = mass_reasons(
        corvid,
        CaseBodies.of(corvid),
        c3,
        grid.arcs["dv_departure_km_s"],
        grid.arcs["dv_arrival_km_s"],
    )
    assert (codes[above] == MassReason.C3_ABOVE_TABLE).all()
    # The case's minimum-mass limit keeps them out of limits.
    assert not grid.within[above].any()


def test_minimum_delivered_mass_limit_and_the_sites_reach(orrery):
    case, grid = orrery
    reach = case.launch_site.max_reachable_dla_deg
    assert reach == pytest.approx(23.92, abs=0.01)  # 13.4 deg site, azimuths 70-110
    inside = grid.within
    assert inside.any()
    assert (grid.arcs["delivered_mass_kg"][inside] >= 1200.0).all()
    assert (np.abs(grid.arcs["dla_deg"][inside]) <= reach).all()
    # Cells that break only the site's reach are named so.
    loose = case.with_changes(**{"limits.dla_max_deg": None})
    arcs = [
        a
        for i in range(0, len(grid.departure_jd_tdb), 7)
        for j in range(0, len(grid.arrival_jd_tdb), 9)
        for a in solve_cell(loose, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j])
        if a.ok and abs(a.metrics["dla_deg"]) > reach
    ]
    assert arcs
    text = breach_text(
        loose, CaseBodies.of(loose), arcs[0].metrics | {"tof_days": arcs[0].tof_days}
    )
    assert "beyond the launch site's reach" in text and not arcs[0].within


def test_best_and_refined_arcs_maximize_delivered_mass(vesper):
    case, grid = vesper
    values = np.where(grid.within, grid.arcs["delivered_mass_kg"], -np.inf)
    i, j, k = grid.best_cell("delivered_mass_kg")
    assert grid.arcs["delivered_mass_kg"][i, j, k] == values.max()
    refined = refine_best(case, grid, "delivered_mass_kg")
    assert refined.arc.within
    assert refined.arc.metrics["delivered_mass_kg"] >= values.max() - 1e-9
    assert refined.improvement >= 0.0


def test_launch_period_can_maximize_its_smallest_delivered_mass():
    case = load("vesper_venus_orbiter")
    by_c3 = launch_period(case, 7, "fixed-arrival")
    by_mass = launch_period(case, 7, "fixed-arrival", "delivered_mass_kg")
    assert by_mass.metric == "delivered_mass_kg"
    assert by_mass.min_delivered_mass_kg == pytest.approx(
        min(d.delivered_mass_kg for d in by_mass.days)
    )
    # Each placement is best at its own goal.
    assert by_mass.min_delivered_mass_kg >= by_c3.min_delivered_mass_kg - 1e-6
    assert by_c3.max_c3_km2_s2 <= by_mass.max_c3_km2_s2 + 1e-9
    with pytest.raises(InputError):
        launch_period(case, 7, "fixed-arrival", "colour")
    free = launch_period(case, 7, "free-arrival", "delivered_mass_kg")
    assert free.arrival_jd_tdb is None and len(free.days) == 7
    # Each day free to pick its arrival does no worse than one arrival for all (to within the
    # minute-level refinement of each, a fraction of a kilogram).
    assert free.min_delivered_mass_kg >= by_mass.min_delivered_mass_kg - 1.0


def test_spacecraft_departure_burn_reads_the_curve_at_the_parking_orbit():
    raw = to_toml_dict(load("vesper_venus_orbiter"))
    raw["propulsion"] = [
        {"name": "kick stage", "isp_s": 300.0, "burns": ["departure"]},
        {"name": "main engine", "isp_s": 321.0, "burns": ["arrival"]},
    ]
    raw["vehicles"] = [
        {
            "name": "to low orbit",
            "performance": [
                {"c3_km2_s2": -64.0, "mass_kg": 9000.0},
                {"c3_km2_s2": -58.0, "mass_kg": 8000.0},
            ],
        }
    ]
    raw["spacecraft"] = {"wet_mass_max_kg": 8000.0}
    case = case_from_dict(raw)
    arc = select_arc(solve_cell(case, 2463006.5, 2463164.5))
    earth = CaseBodies.of(case).departure
    c3_park = -earth.gm_km3_s2 / (earth.radius_km + 200.0)  # circular orbit: C3 = -μ/r
    expected_injected = min(
        8000.0, float(PchipInterpolator([-64.0, -58.0], [9000.0, 8000.0])(c3_park))
    )
    m = arc.metrics
    assert m["injected_mass_kg"] == pytest.approx(expected_injected, rel=1e-12)
    after_departure = expected_injected * math.exp(-m["dv_departure_km_s"] / (300.0 * G0_KM_S2))
    delivered = after_departure * math.exp(-m["dv_arrival_km_s"] / (321.0 * G0_KM_S2))
    assert m["propellant_departure_kg"] == pytest.approx(expected_injected - after_departure)
    assert m["delivered_mass_kg"] == pytest.approx(delivered, rel=1e-12)
    budget = mass_budget(case, arc)
    assert budget.vehicle_c3_km2_s2 == pytest.approx(c3_park)
    assert [b.made_by for b in budget.burns] == ["kick stage", "main engine"]


def test_planet_centred_case_spends_the_wet_mass_on_both_burns():
    case = load("kestrel_relay_leo")  # Earth-centred, leaving an invented satellite's orbit
    arc = select_arc(
        solve_cell(case, case.departure_start_jd_tdb, case.arrival_start_jd_tdb + 0.05)
    )
    m = arc.metrics
    expected = 180.0 * math.exp(-m["dv_total_km_s"] / (220.0 * G0_KM_S2))
    assert m["delivered_mass_kg"] == pytest.approx(expected, rel=1e-12)
    assert arc_launch_window(case, arc).reason == "the case has no [launch_site]"


def test_budget_and_vehicle_comparison_of_one_arc(orrery):
    case, grid = orrery
    i, j, _ = grid.best_cell("delivered_mass_kg")
    arc = select_arc(solve_cell(case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j]), 0)
    budgets = vehicle_comparison(case, arc)
    assert [b.vehicle for b in budgets] == ["Tamsin Heavy", "Corvid 2"]
    heavy, medium = budgets
    assert heavy.ok and heavy.delivered_mass_kg == pytest.approx(arc.metrics["delivered_mass_kg"])
    assert [b.made_by for b in heavy.burns] == ["launch vehicle", "no burn"]  # a flyby
    assert arc.metrics["c3_km2_s2"] > 60.0 and not medium.ok
    assert "above the launch vehicle's performance table" in medium.reason
    data = json.loads(json.dumps(medium.as_dict()))  # JSON-ready: NaN as None
    assert data["injected_mass_kg"] is None


def test_exports_carry_mass_columns_with_units_and_reasons(vesper, tmp_path):
    case, grid = vesper
    path = write_grid(grid, tmp_path / "grid.parquet")
    frame = pd.read_parquet(path)
    for column in (
        "injected_mass_kg",
        "propellant_departure_kg",
        "propellant_arrival_kg",
        "delivered_mass_kg",
        "mass_margin_kg",
        "mass_reason",
    ):
        assert column in frame.columns
    solved = frame[frame["reason"] == "solved"]
    above = solved["c3_km2_s2"] > 60.0  # the end of Corvid 2's table
    assert (solved.loc[~above, "mass_reason"] == "mass computed").all()
    assert solved.loc[above, "mass_reason"].str.startswith("C3 above").all()
    assert solved.loc[above, "delivered_mass_kg"].isna().all()
    assert (frame.loc[frame["reason"] != "solved", "mass_reason"] == "no arc").all()
    csv_path = write_grid(grid, tmp_path / "grid.csv")
    header = [line for line in csv_path.read_text(encoding="utf-8").splitlines() if line[:1] == "#"]
    assert any(line.startswith("# mass_injected: Corvid 2") for line in header)
    i, j, _ = grid.best_cell("delivered_mass_kg")
    arc = select_arc(solve_cell(case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j]), 0)
    report = json.loads(json.dumps(arc_json(case, arc)))
    assert report["units"]["delivered_mass_kg"] == "kg"
    assert report["mass_budget"]["delivered_mass_kg"] == pytest.approx(
        arc.metrics["delivered_mass_kg"]
    )
    assert [v["vehicle"] for v in report["vehicles"]] == ["Corvid 2", "Heron M"]
    assert report["launch_window"]["window"]["openings"]
    assert report["launch_window"]["left_out"]


def test_case_sections_round_trip_and_refuse_what_does_not_apply():
    case = load("vesper_venus_orbiter")
    again = parse_case(__import__("solver.window.case", fromlist=["dumps_toml"]).dumps_toml(case))
    assert again.mass == case.mass and again.launch_site == case.launch_site
    raw = to_toml_dict(load("kestrel_relay_leo"))
    raw["launch_site"] = to_toml_dict(case)["launch_site"]
    with pytest.raises(InputError) as info:
        case_from_dict(raw)
    assert info.value.field == "launch_site"


def test_multi_leg_sequences_refuse_a_delivered_mass_limit_they_cannot_count():
    from app.samples import SAMPLE_DIR
    from solver.sequence.spec import parse_sequence_case

    text = (SAMPLE_DIR / "sequences" / "harrow_jupiter_veega.toml").read_text(encoding="utf-8")
    assert "[limits]\n" in text
    with pytest.raises(InputError) as info:
        parse_sequence_case(text.replace("[limits]\n", "[limits]\ndelivered_mass_min_kg = 500\n"))
    assert info.value.field == "limits.delivered_mass_min_kg"
