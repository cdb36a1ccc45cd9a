"""Leg maps (solver.sequence.leg_map) against the window engine and the sequence engine itself.

* A one-leg sequence's leg map is the window engine's grid (compute_window, whose numbers are
  checked against published sources in tests/test_window.py) at the same dates.
* The map's shortcut (only the legs that change are solved) gives the same numbers as the
  whole batch solved row by row through SequenceModel.arcs and .costs, bit for bit (with several
  arc slots per leg too; next to a stop, to rounding).
* Random cells of a large map are their candidates evaluated alone by the exact path (1e-9).
* The cell at a candidate's own dates is that candidate, as the exact path evaluates it.
* A stop's stay follows the map's start date, and a stay below its minimum is outside limits.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from app.samples import load, resolve_sequence_case_path
from solver.errors import InputError
from solver.reasons import Reason
from solver.sequence.evaluate import SequenceModel
from solver.sequence.leg_map import LEG_MAP_METRICS, MAX_AXIS_POINTS, leg_axes, leg_map
from solver.sequence.result import evaluate_candidate
from solver.sequence.spec import load_sequence_case, sequence_case_from_case
from solver.window.grid import compute_window


def _sample(name: str):
    return load_sequence_case(resolve_sequence_case_path(name))


# Encounter dates of a Harrow candidate within limits (found by the global search with seed 0;
# the angles are its resonant leg's pitch and clock).
HARROW_EPOCHS = [2464188.5776, 2464269.2946, 2464581.1298, 2465310.8611, 2466336.0831]
HARROW_ANGLES = [[15.135347, 178.844036]]


def test_a_one_leg_sequences_map_is_the_window_engines_grid():
    case = load("tallis_rendezvous").with_changes(
        **{"window.departure_step_days": 10.0, "window.arrival_step_days": 15.0}
    )
    grid = compute_window(case)
    spec = sequence_case_from_case(case).sequences[0]
    model = SequenceModel(case, spec)
    i0, j0 = 4, 6
    epochs = [grid.departure_jd_tdb[i0], grid.arrival_jd_tdb[j0]]
    start = grid.departure_jd_tdb[i0 - 3 : i0 + 4]
    end = grid.arrival_jd_tdb[j0 - 4 : j0 + 5]
    cells = leg_map(model, epochs, 0, start, end)
    for name in ("c3_km2_s2", "vinf_arrival_km_s", "dv_total_km_s"):
        expected = grid.metric(name)[i0 - 3 : i0 + 4, j0 - 4 : j0 + 5, 0].T
        got = cells.values[name]
        assert got.shape == expected.shape
        ok = np.isfinite(expected)
        assert ok.sum() > 20
        np.testing.assert_allclose(got[ok], expected[ok], rtol=1e-9, atol=1e-12)
        assert np.isnan(got[~ok]).all()
    within = grid.within[i0 - 3 : i0 + 4, j0 - 4 : j0 + 5, 0].T
    # The grid's TOF limits are the sequence leg's bounds: the same cells are within limits.
    assert np.array_equal(cells.within, within)


@pytest.mark.parametrize("leg", [0, 1, 2, 3])
def test_the_shortcut_equals_the_whole_batch_bit_for_bit(leg):
    sequence_case = _sample("harrow_jupiter_veega")
    spec = sequence_case.sequences[0]
    model = SequenceModel(sequence_case.case, spec)
    a, b = spec.leg_epochs(leg)
    start, end = leg_axes(HARROW_EPOCHS, a, b, 6.0, 2.0)
    cells = leg_map(model, HARROW_EPOCHS, leg, start, end, angles_deg=HARROW_ANGLES)
    rows = np.repeat(np.asarray(HARROW_EPOCHS)[None, :], start.size * end.size, axis=0)
    rows[:, a] = np.tile(start, end.size)
    rows[:, b] = np.repeat(end, start.size)
    angles = np.repeat(np.asarray(HARROW_ANGLES)[None], len(rows), axis=0)
    whole = model.costs(model.arcs(rows, angles, fast=True))
    objective = whole.objective.reshape(cells.shape)
    assert np.array_equal(cells.values["dv_total_km_s"], objective, equal_nan=True)
    assert np.array_equal(cells.within, whole.within.reshape(cells.shape))


def test_the_candidates_own_cell_is_the_candidate():
    sequence_case = _sample("harrow_jupiter_veega")
    spec = sequence_case.sequences[0]
    model = SequenceModel(sequence_case.case, spec)
    candidate = evaluate_candidate(model, HARROW_EPOCHS, angles_deg=HARROW_ANGLES)
    assert candidate.within_limits
    a, b = spec.leg_epochs(1)
    start, end = leg_axes(HARROW_EPOCHS, a, b, 5.0, 1.0)
    cells = leg_map(model, HARROW_EPOCHS, 1, start, end, angles_deg=HARROW_ANGLES)
    centre = (len(end) // 2, len(start) // 2)
    assert start[centre[1]] == HARROW_EPOCHS[a] and end[centre[0]] == HARROW_EPOCHS[b]
    # The map reads the compiled ephemeris (within 1e-6 km of the exact reads): the numbers
    # agree to far better than they are shown.
    assert cells.values["dv_total_km_s"][centre] == pytest.approx(candidate.dv_total_km_s, 1e-9)
    assert cells.values["c3_km2_s2"][centre] == pytest.approx(
        candidate.encounters[0].c3_km2_s2, 1e-9
    )
    assert cells.values["vinf_arrival_km_s"][centre] == pytest.approx(
        candidate.encounters[-1].vinf_in_km_s, 1e-9
    )
    margins = [
        e.periapsis_altitude_km - e.altitude_min_km
        for e in candidate.encounters
        if e.kind == "flyby"
    ]
    assert cells.values["flyby_margin_km"][centre] == pytest.approx(min(margins), rel=1e-6)
    assert bool(cells.within[centre])
    # Moving the Venus flyby changes both legs that meet there, and nothing else.
    tof = cells.values["leg_tof_days"]
    assert np.allclose(tof, end[:, None] - start[None, :])
    assert set(LEG_MAP_METRICS) == set(cells.values)


def test_a_stops_stay_follows_the_start_date_and_its_minimum_is_a_limit():
    sequence_case = _sample("quillon_sample_return")
    spec = sequence_case.sequences[0]
    model = SequenceModel(sequence_case.case, spec)
    stop = next(leg for leg in spec.legs if leg.kind == "stop")
    assert stop.stay_min_days is not None
    arrive = sequence_case.case.departure_start_jd_tdb + 300.0
    leave = arrive + stop.stay_min_days + 3.0
    home = leave + 0.5 * (spec.legs[1].tof_min_days + spec.legs[1].tof_max_days)
    depart = arrive - 0.5 * (stop.tof_min_days + stop.tof_max_days)
    epochs = [depart, arrive, leave, home]
    a, b = spec.leg_epochs(1)  # leave the stop, arrive home
    assert (a, b) == (2, 3)
    start = leave + np.array([-6.0, -4.0, -2.0, 0.0, 2.0])
    end = np.array([home])
    cells = leg_map(model, epochs, 1, start, end)
    stays = start - arrive
    has_arc = cells.reason[0] == Reason.OK
    assert has_arc.all()
    short = stays < stop.stay_min_days
    assert short.any() and (~short).any()
    assert not cells.within[0, short].any()  # a stay below its minimum breaks its limit


def test_axes_and_bad_requests_are_refused_by_name():
    start, end = leg_axes([10.0, 20.0, 30.0], 1, 2, 3.0, 1.0)
    assert np.array_equal(start, [17.0, 18.0, 19.0, 20.0, 21.0, 22.0, 23.0])
    assert np.array_equal(end, start + 10.0)
    with pytest.raises(InputError, match="leg map step"):
        leg_axes([10.0, 20.0], 0, 1, 400.0, 1.0)  # 801 dates per axis
    assert 2 * math.floor(200.0 / 1.0) + 1 == MAX_AXIS_POINTS
    sequence_case = _sample("harrow_jupiter_veega")
    model = SequenceModel(sequence_case.case, sequence_case.sequences[0])
    with pytest.raises(InputError, match="angles"):
        leg_map(model, HARROW_EPOCHS, 0, [HARROW_EPOCHS[0]], [HARROW_EPOCHS[1]])
    with pytest.raises(InputError, match="leg"):
        leg_map(model, HARROW_EPOCHS, 7, [1.0], [2.0], angles_deg=HARROW_ANGLES)


def _whole_batch(model, epochs, leg, start, end, angles):
    """Every cell of a map as a whole candidate, through SequenceModel.arcs and .costs."""
    a, b = model.spec.leg_epochs(leg)
    rows = np.repeat(np.asarray(epochs)[None, :], start.size * end.size, axis=0)
    rows[:, a] = np.tile(start, end.size)
    rows[:, b] = np.repeat(end, start.size)
    if angles is not None:
        angles = np.repeat(np.asarray(angles)[None], len(rows), axis=0)
    return model.costs(model.arcs(rows, angles, fast=True))


def _multi_revolution_harrow():
    """The Harrow sequence with one revolution allowed on its Lambert legs (several arc slots
    per leg, so the map's best path chooses among them)."""
    sequence_case = _sample("harrow_jupiter_veega")
    spec = sequence_case.sequences[0]
    legs = tuple(
        leg if leg.resonance else dataclasses.replace(leg, max_revolutions=1) for leg in spec.legs
    )
    return SequenceModel(sequence_case.case, dataclasses.replace(spec, legs=legs))


@pytest.mark.parametrize("leg", [0, 1, 3])
def test_shared_arcs_choose_the_same_slots_as_the_whole_batch(leg):
    # Several slots per leg: the encounters solved once per shared date and the best path over
    # them give the whole batch's numbers bit for bit.
    model = _multi_revolution_harrow()
    assert (
        max(
            len(leg.revolutions)
            for leg in model.arcs(
                np.asarray([HARROW_EPOCHS]), np.asarray([HARROW_ANGLES]), fast=True
            ).legs
        )
        == 3
    )
    a, b = model.spec.leg_epochs(leg)
    start, end = leg_axes(HARROW_EPOCHS, a, b, 40.0, 10.0)
    cells = leg_map(model, HARROW_EPOCHS, leg, start, end, angles_deg=HARROW_ANGLES)
    whole = _whole_batch(model, HARROW_EPOCHS, leg, start, end, HARROW_ANGLES)
    objective = whole.objective.reshape(cells.shape)
    assert np.isfinite(objective).sum() > 10
    assert np.array_equal(cells.values["dv_total_km_s"], objective, equal_nan=True)
    assert np.array_equal(cells.within, whole.within.reshape(cells.shape))
    assert np.array_equal(cells.reason, whole.reason.reshape(cells.shape))


def test_a_map_next_to_a_stop_equals_the_whole_batch():
    # Leg 1 starts at the stop's leave date; the leg before it ends at the arrival date, which
    # the map holds (and the stay follows the map's start date).
    sequence_case = _sample("quillon_sample_return")
    spec = sequence_case.sequences[0]
    model = SequenceModel(sequence_case.case, spec)
    stop = next(leg for leg in spec.legs if leg.kind == "stop")
    arrive = sequence_case.case.departure_start_jd_tdb + 300.0
    leave = arrive + stop.stay_min_days + 3.0
    home = leave + 0.5 * (spec.legs[1].tof_min_days + spec.legs[1].tof_max_days)
    depart = arrive - 0.5 * (stop.tof_min_days + stop.tof_max_days)
    epochs = [depart, arrive, leave, home]
    for leg in (0, 1):
        a, b = spec.leg_epochs(leg)
        start, end = leg_axes(epochs, a, b, 8.0, 2.0)
        cells = leg_map(model, epochs, leg, start, end)
        whole = _whole_batch(model, epochs, leg, start, end, None)
        objective = whole.objective.reshape(cells.shape)
        assert np.isfinite(objective).sum() > 10
        # The map adds the stop's two burns one at a time, the costs as one pair term: equal
        # to rounding.
        got = cells.values["dv_total_km_s"]
        assert np.array_equal(np.isnan(got), np.isnan(objective))
        np.testing.assert_allclose(got, objective, rtol=1e-13)
        assert np.array_equal(cells.within, whole.within.reshape(cells.shape))


@pytest.mark.parametrize("leg", [0, 1, 2, 3])
def test_random_cells_are_their_candidates_by_the_exact_path(leg):
    # A few cells of a large map, each evaluated whole on its own by the exact path (the window
    # engine's ephemeris reads and Lambert calls): the map's numbers agree to 1e-9.
    sequence_case = _sample("harrow_jupiter_veega")
    spec = sequence_case.sequences[0]
    model = SequenceModel(sequence_case.case, spec)
    a, b = spec.leg_epochs(leg)
    start, end = leg_axes(HARROW_EPOCHS, a, b, 60.0, 1.0)
    cells = leg_map(model, HARROW_EPOCHS, leg, start, end, angles_deg=HARROW_ANGLES)
    rng = np.random.default_rng(leg)
    has_arc = np.argwhere(np.isfinite(cells.values["dv_total_km_s"]))
    assert len(has_arc) > 100
    for j, i in has_arc[rng.choice(len(has_arc), 4, replace=False)]:
        candidate = evaluate_candidate(model, cells.epochs_at(i, j), angles_deg=HARROW_ANGLES)
        value = cells.values
        assert value["dv_total_km_s"][j, i] == pytest.approx(candidate.dv_total_km_s, rel=1e-9)
        assert value["c3_km2_s2"][j, i] == pytest.approx(
            candidate.encounters[0].c3_km2_s2, rel=1e-9
        )
        assert value["vinf_arrival_km_s"][j, i] == pytest.approx(
            candidate.encounters[-1].vinf_in_km_s, rel=1e-9
        )
        burns = [e.dv_km_s for e in candidate.encounters if e.kind == "flyby"]
        assert value["flyby_dv_max_km_s"][j, i] == pytest.approx(max(burns), rel=1e-9, abs=1e-12)
        margins = [
            e.periapsis_altitude_km - e.altitude_min_km
            for e in candidate.encounters
            if e.kind == "flyby"
        ]
        assert value["flyby_margin_km"][j, i] == pytest.approx(min(margins), rel=1e-9)
        assert bool(cells.within[j, i]) == candidate.within_limits
