"""Sequences against the rest of arcwindow and against independent computations.

* A one-leg sequence is the window engine's arc, bit for bit (solve_cell and the grid).
* The compiled ephemeris tables agree with solver.ephemeris.states; the fast (search) path agrees
  with the exact path.
* The best arc path of the dynamic programme equals a brute-force search over every slot.
* Reversing a round trip's dates gives the mirrored legs (time reversal of two-body motion).
* A resonant return comes back to where it left after its period (checked by scipy's DOP853).
* Grid searches repeat exactly; the legs they prune could not have been joined.
* A candidate's link reopens the same candidate.
"""

from __future__ import annotations

import dataclasses
import itertools
import math
import tomllib

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from app.samples import load, resolve_sequence_case_path
from solver.ephemeris.bodies import default_registry
from solver.ephemeris.compiled import compile_states
from solver.ephemeris.states import states
from solver.ephemeris.timescales import utc_to_jd_tdb
from solver.mechanics.kepler import state_to_elements
from solver.reasons import Reason
from solver.sequence.evaluate import SequenceModel
from solver.sequence.flyby import largest_turn_deg, smallest_dv_km_s
from solver.sequence.fused import score_fused
from solver.sequence.grid import GridSettings, grid_search
from solver.sequence.record import candidate_from_link, candidate_record, link_parameters
from solver.sequence.result import evaluate_candidate
from solver.sequence.spec import (
    load_sequence_case,
    sequence_case_from_case,
    sequence_case_from_dict,
)
from solver.window.cell import solve_cell
from solver.window.grid import compute_window


def _sample(name: str):
    return load_sequence_case(resolve_sequence_case_path(name))


@pytest.mark.parametrize(
    "name", ["vesper_venus_orbiter", "tallis_rendezvous", "orrery_jupiter_flyby"]
)
def test_a_one_leg_sequence_is_the_window_engines_arc_bit_for_bit(name):
    case = load(name)
    case = case.with_changes(**{"transfer.max_revolutions": 1})
    spec = sequence_case_from_case(case).sequences[0]
    model = SequenceModel(case, spec)
    dep = case.departure_start_jd_tdb + 3.0 * case.departure_step_days
    arr = case.arrival_end_jd_tdb - 2.0 * case.arrival_step_days
    candidate = evaluate_candidate(model, [dep, arr])
    arcs = solve_cell(case, dep, arr)
    leg = candidate.legs[0]
    window_arc = next(
        a for a in arcs if a.revolutions == leg.revolutions and a.branch == leg.branch
    )
    assert np.array_equal(leg.r1_km, window_arc.r1_km)
    assert np.array_equal(leg.v1_km_s, window_arc.v1_km_s)
    assert np.array_equal(leg.v2_km_s, window_arc.v2_km_s)
    for metric, value in window_arc.metrics.items():
        assert leg.metrics[metric] == value or (
            math.isnan(value) and math.isnan(leg.metrics[metric])
        )
    # Every arc slot, not only the chosen one.
    every = model.costs(model.arcs(np.array([[dep, arr]])), detail=True).values["legs"][0]
    for slot, arc in enumerate(arcs):
        for metric, value in arc.metrics.items():
            if metric != "tof_days":
                assert np.array_equal(every[metric][0, slot], value, equal_nan=True), metric
    # ... and every slot of the batch equals the window grid's cell at the grid's own dates.
    grid = compute_window(
        case.with_changes(**{"window.departure_step_days": 30.0, "window.arrival_step_days": 60.0})
    )
    i, j = 1, len(grid.arrival_jd_tdb) - 2
    batch = model.arcs(np.array([[grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j]]]))
    costs = model.costs(batch, detail=True)
    # The grid solves whole rows at a time and the sequence one candidate: the same numbers,
    # bit for bit (an element body's state does not depend on the other dates asked with it).
    for metric, values in costs.values["legs"][0].items():
        assert np.array_equal(values[0], grid.arcs[metric][i, j], equal_nan=True), metric
    assert np.array_equal(batch.legs[0].reason[0], grid.reason[i, j])
    within = costs.within[0]
    assert within == bool(grid.within[i, j, costs.slots[0, 0]]) or not grid.within[i, j].any()


def test_compiled_states_agree_with_the_ephemeris_interface():
    registry = default_registry()
    jd = np.random.default_rng(1).uniform(2462000.0, 2466000.0, 500)
    names = ["earth", "venus", "mars", "jupiter", "moon", "mercury"]
    compiled = compile_states(names, "sun", registry, 2461990.0, 2466010.0)
    assert compiled is not None
    for k, name in enumerate(compiled.names):
        r, v = compiled.states(np.full(jd.shape, k), jd)
        r0, v0 = states(name, jd, central="sun")
        # Rounding of a different summation order only: 1e-6 km and 1e-12 km/s.
        assert np.max(np.abs(r - r0)) < 1e-6, name
        assert np.max(np.abs(v - v0)) < 1e-12, name
    # Each planet's terms (its segment less the Sun's; the Earth's three) merged into one.
    assert np.array_equal(np.diff(compiled.cheb_first), np.ones(len(names), dtype=np.int64))
    unmerged = compile_states(names, "sun", registry, 2461990.0, 2466010.0, merge=False)
    assert unmerged is not None and unmerged.cheb_first[-1] > len(names)
    outside = compiled.states(np.zeros(1, dtype=np.int64), np.array([2470000.0]))[0]
    assert np.isnan(outside).all()
    assert compile_states(names, "sun", registry, 2462000.0, 2463000.0, source="mean") is None


def test_the_search_path_agrees_with_the_exact_path():
    sequence_case = _sample("harrow_jupiter_veega")
    spec = sequence_case.sequences[0]
    model = SequenceModel(sequence_case.case, spec)
    bounds = np.array(spec.variable_bounds(sequence_case.case))
    x = bounds[:, 0] + np.random.default_rng(7).uniform(size=(64, len(bounds))) * np.ptp(bounds, 1)
    fast = model.score(x)
    exact = model.costs(model.arcs(spec.epochs(x), spec.angles(x), fast=False)).score
    assert np.allclose(fast, exact, rtol=1e-9, atol=1e-9)


@pytest.mark.parametrize(
    "name", ["harrow_jupiter_veega", "quillon_sample_return", "corrow_lissa_tour"]
)
def test_the_compiled_pass_scores_as_the_numpy_stages(name):
    """The one compiled pass (solver.sequence.fused) and the two numpy stages give the same
    score, objective, penalty and arc path for every candidate: flybys, stops, resonant legs,
    revolutions (up to one here, three arcs per leg) and every limit of the samples."""
    sequence_case = _sample(name)
    for spec in sequence_case.sequences:
        legs = tuple(dataclasses.replace(leg, max_revolutions=1) for leg in spec.legs)
        spec = dataclasses.replace(spec, legs=legs, events=())
        model = SequenceModel(sequence_case.case, spec)
        plan = model.fused()
        assert plan is not None
        bounds = np.array(spec.variable_bounds(sequence_case.case))
        rng = np.random.default_rng(11)
        x = bounds[:, 0] + rng.uniform(size=(3000, len(bounds))) * np.ptp(bounds, 1)
        fused = score_fused(plan, x)
        angles = spec.angles(x) if spec.resonant_legs else None
        staged = model.costs(model.arcs(spec.epochs(x), angles, fast=True))
        assert np.allclose(fused.score, staged.score, rtol=1e-12, atol=0.0)
        assert np.allclose(fused.objective, staged.objective, rtol=1e-12, equal_nan=True)
        assert np.allclose(fused.penalty, staged.penalty, rtol=1e-9, atol=1e-12, equal_nan=True)
        same_path = (fused.slots == staged.slots).all(axis=1)
        assert same_path.mean() > 0.999  # a tie broken by the last bit may choose another arc
        within = np.isfinite(fused.penalty) & (fused.penalty == 0.0)
        assert np.array_equal(within, staged.within)
        assert within.any() or name == "harrow_jupiter_veega"


def test_without_compiled_tables_the_search_scores_through_the_numpy_stages():
    sequence_case = _sample("harrow_jupiter_veega")
    case = sequence_case.case.with_changes(**{"ephemeris.source": "mean"})
    model = SequenceModel(case, sequence_case.sequences[0])
    assert model.fused() is None
    bounds = np.array(model.spec.variable_bounds(case))
    x = bounds[:, 0] + 0.5 * np.ptp(bounds, 1)
    assert np.isfinite(model.score(x[None, :])).all()
    # A limit on a quantity the pass does not compute (a one-leg case's delivered mass) too.
    massed = load("orrery_jupiter_flyby")
    assert massed.limits.delivered_mass_min_kg is not None
    model = SequenceModel(massed, sequence_case_from_case(massed).sequences[0])
    assert model.fused() is None
    x = np.array([[massed.departure_start_jd_tdb + 10.0, 800.0]])
    assert model.score(x).shape == (1,)


def test_the_best_arc_path_is_the_brute_force_best():
    sequence_case = _sample("harrow_jupiter_veega")
    base = sequence_case.sequences[0]
    # No resonance, every leg up to one revolution: three arcs per leg to choose from.
    legs = tuple(dataclasses.replace(leg, resonance=None, max_revolutions=1) for leg in base.legs)
    spec = dataclasses.replace(base, legs=legs, events=())
    model = SequenceModel(sequence_case.case, spec)
    bounds = np.array(spec.variable_bounds(sequence_case.case))
    x = bounds[:, 0] + np.random.default_rng(3).uniform(size=(12, len(bounds))) * np.ptp(bounds, 1)
    epochs = spec.epochs(x)
    batch = model.arcs(epochs)
    best = model.costs(batch)
    for row in range(len(x)):
        scores = {}
        for slots in itertools.product(range(3), repeat=len(legs)):
            pinned = model.costs(batch, pinned=list(slots))
            scores[slots] = pinned.score[row]
        expected = min(scores.values())
        assert best.score[row] == pytest.approx(expected, rel=1e-12, abs=1e-12)


def _element_table(name, r, v, epoch_jd, mu, **extra):
    elements = state_to_elements(r, v, mu)
    return {
        "name": name,
        "central_body": "sun",
        "epoch_jd_tdb": epoch_jd,
        "semi_major_axis_km": float(elements.a_km),
        "eccentricity": float(elements.e),
        "inclination_deg": math.degrees(float(elements.inclination_rad)),
        "raan_deg": math.degrees(float(elements.raan_rad)),
        "arg_periapsis_deg": math.degrees(float(elements.arg_periapsis_rad)),
        "true_anomaly_deg": math.degrees(float(elements.true_anomaly_rad)),
        "frame": "icrf",
        **extra,
    }


def _round_trip(bodies, departure, stop, direction, dates):
    text = f"""
[case]
title = "round trip"
central_body = "sun"
departure_body = "{departure}"
target_body = "{departure}"
[window]
departure_start = "2030-01-01"
departure_end = "2040-01-01"
arrival_start = "2030-01-01"
arrival_end = "2040-01-01"
[transfer]
direction = "{direction}"
[sequence]
[[sequence.legs]]
to = "{stop}"
kind = "stop"
tof_min_days = 10
tof_max_days = 900
stay_min_days = 0
stay_max_days = 900
[[sequence.legs]]
tof_min_days = 10
tof_max_days = 900
"""
    data = tomllib.loads(text)
    data["bodies"] = bodies
    sequence_case = sequence_case_from_dict(data)
    model = SequenceModel(sequence_case.case, sequence_case.sequences[0])
    return evaluate_candidate(model, dates)


def test_reversing_a_round_trips_dates_mirrors_its_legs():
    """Two-body motion run backwards in time retraces the same path with every velocity
    reversed. The bodies are given as two-body orbits (a copy of the Earth's and Quillon's),
    and their mirror images leave each position at the mirrored date with the opposite velocity;
    the round trip over the mirrored dates (in reverse order, flown the other way round) must
    be the original legs, last first, each run backwards."""
    mu = default_registry().get("sun").gm_km3_s2
    reference = float(utc_to_jd_tdb("2034-01-01"))
    mirror = 2.0 * reference  # t -> mirror - t
    quillon = _sample("quillon_sample_return").case.registry()
    bodies, mirrored = [], []
    for name, registry in (("earth", default_registry()), ("Quillon", quillon)):
        r, v = states(name, reference, central="sun", registry=registry)
        label = "Home" if name == "earth" else name
        bodies.append(_element_table(label, r, v, reference, mu))
        mirrored.append(_element_table(f"{label}Mirror", r, -v, mirror - reference, mu))
    dates = [float(utc_to_jd_tdb(t)) for t in ("2033-05-15", "2034-03-21", "2034-06-15",
                                                "2035-04-23")]  # fmt: skip
    forward = _round_trip(bodies, "Home", "Quillon", "prograde", dates)
    backward = _round_trip(
        mirrored, "HomeMirror", "QuillonMirror", "retrograde", [mirror - t for t in dates[::-1]]
    )
    assert forward.ok and backward.ok
    for leg, reverse in zip(forward.legs, backward.legs[::-1], strict=True):
        assert leg.tof_days == pytest.approx(reverse.tof_days, abs=1e-6)
        assert np.allclose(reverse.r1_km, leg.r2_km, rtol=1e-10, atol=1e-3)
        assert np.allclose(reverse.v1_km_s, -leg.v2_km_s, rtol=1e-9, atol=1e-9)
        assert np.allclose(reverse.v2_km_s, -leg.v1_km_s, rtol=1e-9, atol=1e-9)
    # The stop's arrival and departure v∞ trade places.
    stop, stop_back = forward.encounters[1], backward.encounters[1]
    assert stop_back.vinf_in_km_s == pytest.approx(stop.vinf_out_km_s, rel=1e-9)
    assert stop_back.vinf_out_km_s == pytest.approx(stop.vinf_in_km_s, rel=1e-9)


def test_a_resonant_return_comes_back_to_where_it_left():
    sequence_case = _sample("harrow_jupiter_veega")
    case, spec = sequence_case.case, sequence_case.sequences[0]
    model = SequenceModel(case, spec)
    k = spec.resonant_legs[0]
    bounds = np.array(spec.variable_bounds(case))
    x = bounds[:, 0] + 0.5 * np.ptp(bounds, 1)
    x[spec.variable_names.index(f"leg{k + 1}_pitch_deg")] = 12.0
    x[spec.variable_names.index(f"leg{k + 1}_clock_deg")] = 40.0
    candidate = evaluate_candidate(model, spec.epochs(x), angles_deg=spec.angles(x))
    leg = candidate.legs[k]
    assert leg.branch == "resonant" and leg.revolutions == 1
    mu = leg.mu_km3_s2

    def rhs(_t, y):
        return np.concatenate([y[3:], -mu * y[:3] / np.linalg.norm(y[:3]) ** 3])

    sol = solve_ivp(
        rhs,
        (0.0, leg.flight_s),
        np.concatenate([leg.r1_km, leg.v1_km_s]),
        method="DOP853",
        rtol=1e-12,
        atol=1e-6,
    )
    end = sol.y[:, -1]
    assert np.linalg.norm(end[:3] - leg.r1_km) < 1e-6 * np.linalg.norm(leg.r1_km)
    assert np.linalg.norm(end[3:] - leg.v1_km_s) < 1e-6 * np.linalg.norm(leg.v1_km_s)
    # The body itself has moved on by the miss distance, which the limit bounds.
    r_body = states("earth", leg.arrival_jd_tdb, central="sun")[0]
    assert leg.metrics["miss_km"] == pytest.approx(np.linalg.norm(r_body - leg.r1_km), rel=1e-9)


def test_a_return_whose_positions_coincide_is_reported_as_resonant_not_solved():
    sequence_case = _sample("harrow_jupiter_veega")
    base = sequence_case.sequences[0]
    legs = list(base.legs)
    legs[2] = dataclasses.replace(legs[2], resonance=None, max_revolutions=1)
    spec = dataclasses.replace(base, legs=tuple(legs), events=(), resonance_angle_deg=1.0)
    model = SequenceModel(sequence_case.case, spec)
    # Earth after (about) one sidereal year: the two positions lie within a degree.
    t0 = float(utc_to_jd_tdb("2035-06-01"))
    epochs = np.array([[t0 - 400.0, t0 - 250.0, t0, t0 + 365.2564, t0 + 1500.0]])
    batch = model.arcs(epochs)
    assert (batch.legs[2].reason[0] == Reason.RESONANT_RETURN).all()
    candidate = evaluate_candidate(model, epochs[0])
    assert not candidate.ok and candidate.reason == Reason.RESONANT_RETURN
    assert "resonant return" in Reason.RESONANT_RETURN.description


def test_grid_search_repeats_exactly_and_prunes_only_unjoinable_legs():
    sequence_case = _sample("harrow_jupiter_veega")
    base = sequence_case.sequences[0]
    # A short Venus-Earth-Jupiter sequence over a narrow window keeps the test quick.
    legs = (base.legs[0], dataclasses.replace(base.legs[1]), base.legs[3])
    legs = tuple(dataclasses.replace(leg, tof_step_days=20.0) for leg in legs)
    spec = dataclasses.replace(base, legs=legs, events=(), name="evej")
    case = dataclasses.replace(
        sequence_case.case,
        departure_end_jd_tdb=sequence_case.case.departure_start_jd_tdb + 120.0,
    )
    sc = dataclasses.replace(sequence_case, case=case, sequences=(spec,))
    settings = GridSettings(top=3, beam=3000, departure_step_days=10.0)
    first = grid_search(sc, spec, settings)
    second = grid_search(sc, spec, settings)
    assert [c.epochs_jd_tdb for c in first.candidates] == [
        c.epochs_jd_tdb for c in second.candidates
    ]
    assert [c.score for c in first.candidates] == [c.score for c in second.candidates]
    assert any(level.pruned_flyby > 0 for level in first.levels)
    # The pruning rule is the flyby's own bounds: a pair it drops needs too big a turn or burn.
    venus = default_registry().get("venus")
    rp_min = venus.radius_km + base.legs[0].altitude_min_km
    assert float(largest_turn_deg(5.0, 5.0, venus.gm_km3_s2, rp_min)) < 180.0
    assert float(smallest_dv_km_s(5.0, 6.0, venus.gm_km3_s2, rp_min)) > 0.0


def test_grid_search_flies_a_resonant_leg_on_its_resonance_circle():
    """The sample's 2:1 Earth-Earth leg on the grid: the flyby into it keeps |v∞| (the pitch
    is the one of the arriving v∞), the clock angle steps; repeatable, within limits."""
    sequence_case = _sample("harrow_jupiter_veega")
    base = sequence_case.sequences[0]
    legs = tuple(
        dataclasses.replace(leg, tof_step_days=5.0 if leg.resonance else 20.0) for leg in base.legs
    )
    spec = dataclasses.replace(base, legs=legs, events=())
    case = dataclasses.replace(
        sequence_case.case,
        departure_start_jd_tdb=sequence_case.case.departure_start_jd_tdb + 200.0,
        departure_end_jd_tdb=sequence_case.case.departure_start_jd_tdb + 240.0,
    )
    sc = dataclasses.replace(sequence_case, case=case, sequences=(spec,))
    settings = GridSettings(top=2, beam=2000, departure_step_days=8.0, clock_step_deg=20.0)
    first = grid_search(sc, spec, settings)
    second = grid_search(sc, spec, settings)
    assert [c.epochs_jd_tdb for c in first.candidates] == [
        c.epochs_jd_tdb for c in second.candidates
    ]
    best = first.candidates[0]
    assert best.within_limits, best.breaches
    k = spec.resonant_legs[0]
    assert best.legs[k].branch == "resonant"
    # The Earth flyby that enters the resonant orbit needs no burn: same |v∞| in and out.
    entering = best.encounters[k]
    assert entering.vinf_out_km_s == pytest.approx(entering.vinf_in_km_s, rel=1e-9)
    assert entering.dv_km_s < 1e-6
    clock = best.legs[k].metrics["clock_deg"]
    assert (clock + 180.0) / 20.0 == pytest.approx(round((clock + 180.0) / 20.0), abs=1e-9)
    assert any(level.pruned_flyby > 0 for level in first.levels)


def test_a_link_reopens_the_same_candidate_and_the_record_is_plain_data():
    import json

    sequence_case = _sample("quillon_sample_return")
    spec = sequence_case.sequences[0]
    model = SequenceModel(sequence_case.case, spec)
    epochs = [
        float(utc_to_jd_tdb(t))
        for t in ("2033-05-15T12:00:00", "2034-03-21", "2034-06-15", "2035-04-23")
    ]
    candidate = evaluate_candidate(model, epochs)
    params = link_parameters(candidate, "upload-abc")
    again = candidate_from_link(sequence_case, params)
    assert again.epochs_jd_tdb == pytest.approx(candidate.epochs_jd_tdb, abs=1e-7)
    assert again.dv_total_km_s == pytest.approx(candidate.dv_total_km_s, rel=1e-9)
    record = candidate_record(sequence_case, candidate, case_id="upload-abc")
    assert json.loads(json.dumps(record)) == record
    assert record["link"] == params and record["encounters"][1]["kind"] == "stop"


def test_a_link_carries_a_resonant_legs_angles():
    sequence_case = _sample("harrow_jupiter_veega")
    spec = sequence_case.sequences[0]
    model = SequenceModel(sequence_case.case, spec)
    bounds = np.array(spec.variable_bounds(sequence_case.case))
    x = bounds[:, 0] + 0.4 * np.ptp(bounds, 1)
    candidate = evaluate_candidate(model, spec.epochs(x), angles_deg=spec.angles(x))
    params = link_parameters(candidate, "sample")
    assert params["arcs"].split(".")[2] == "*" and "/" in params["res"]
    again = candidate_from_link(sequence_case, params)
    assert again.legs[2].metrics["pitch_deg"] == pytest.approx(
        candidate.legs[2].metrics["pitch_deg"], abs=1e-6
    )
    assert again.dv_total_km_s == pytest.approx(candidate.dv_total_km_s, rel=1e-6)
