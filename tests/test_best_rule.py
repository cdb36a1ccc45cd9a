"""The one best-arc rule (WindowGrid.best_cell) when the metric does not separate the arcs.

Orrery flies past Jupiter with no parking orbit: the launch vehicle delivers the C3 (departure
Δv counted 0) and a flyby burns nothing on arrival (arrival Δv 0), so total Δv is 0 for every
arc (the conventions of solver/window/metrics.py, common practice in preliminary design). Asked
for the best arc by total Δv, the rule must say so and rank by its stated tie-break instead of
returning whichever arc comes first in memory.
"""

from __future__ import annotations

import numpy as np
import pytest

from app.cli import main
from app.samples import load
from solver.window.grid import TIE_BREAK, compute_window
from solver.window.refine import refine_best


@pytest.fixture(scope="module")
def orrery():
    case = load("orrery_jupiter_flyby")
    return case, compute_window(case)


def test_total_dv_is_zero_for_every_orrery_arc(orrery):
    _case, grid = orrery
    dv = grid.arcs["dv_total_km_s"][grid.within]
    assert dv.size > 100 and np.all(dv == 0.0)


def test_a_metric_that_ranks_nothing_falls_to_the_stated_tie_break(orrery):
    _case, grid = orrery
    choice = grid.best_choice("dv_total_km_s")
    assert choice is not None and not choice.separates
    assert choice.decided_by == "c3_km2_s2" == TIE_BREAK[1]
    # the arc of lowest C3 within limits, found here by brute force
    c3 = np.where(grid.within, grid.arcs["c3_km2_s2"], np.inf)
    assert choice.index == tuple(int(x) for x in np.unravel_index(np.argmin(c3), c3.shape))
    assert grid.best_cell("dv_total_km_s") == choice.index
    assert "does not rank them" in choice.note and "lowest C3" in choice.note


def test_ties_at_the_lowest_value_are_ranked_too(orrery):
    """Best by TOF among the arcs of at least 601 days: every cell on the 601-day diagonal ties
    (whole-day grid, whole-day TOFs); the tie-break (total Δv, 0 here, then C3) picks the
    lowest C3 among them."""
    _case, grid = orrery
    tof = grid.metric("tof_days")
    mask = grid.converged & (tof >= 601.0 - 1e-9)
    choice = grid.best_choice("tof_days", mask=mask)
    shortest = mask & (np.abs(tof - 601.0) < 1e-9)
    assert shortest.sum() > 10 and choice.tied == shortest.sum() and choice.separates
    c3 = np.where(shortest, grid.arcs["c3_km2_s2"], np.inf)
    assert choice.index == tuple(int(x) for x in np.unravel_index(np.argmin(c3), c3.shape))
    assert choice.decided_by == "c3_km2_s2"
    assert "share the lowest TOF" in choice.note


def test_a_metric_that_separates_needs_no_note(orrery):
    _case, grid = orrery
    choice = grid.best_choice("c3_km2_s2")
    assert choice.tied == 1 and choice.note == ""


def test_refinement_follows_the_tie_break_and_says_so(orrery):
    case, grid = orrery
    by_dv = refine_best(case, grid, "dv_total_km_s")
    by_c3 = refine_best(case, grid, "c3_km2_s2")
    assert "does not rank them" in by_dv.note
    assert by_dv.arc.metrics["c3_km2_s2"] == pytest.approx(by_c3.arc.metrics["c3_km2_s2"])


def test_cli_best_says_which_rule_chose_the_arc(capsys):
    assert main(["best", "orrery_jupiter_flyby", "--metric", "dv_total_km_s", "--no-cache"]) == 0
    out = capsys.readouterr().out
    assert "does not rank them" in out and "lowest C3" in out


@pytest.fixture(scope="module")
def relay():
    """Satellites of Earth with several revolutions: every cell holds several arcs, all of
    the same TOF (the cell's), so a TOF ranking ties in every cell."""
    case = load("kestrel_relay_leo").with_changes(
        **{"window.departure_step_days": 0.25, "window.arrival_step_days": 0.25}
    )
    return case, compute_window(case)


def test_each_cells_best_arc_follows_the_one_rule(relay):
    """The best arc of each cell (the map's "best arc of each cell") once took the first slot
    whenever the metric tied, as for TOF in every cell; it now follows WindowGrid.best_cell's
    rule, restricted to that cell."""
    _, grid = relay
    # a cell's arcs within limits if it has any, else its other arcs (as best_slot ranks them)
    qualifying = np.where(grid.within.any(axis=-1, keepdims=True), grid.within, grid.converged)
    for metric in ("tof_days", "dv_total_km_s"):
        slots = grid.best_slot(metric)
        checked = 0
        for i, j in zip(*np.nonzero(qualifying.sum(axis=-1) > 1), strict=True):
            mask = np.zeros_like(grid.within)
            mask[i, j] = qualifying[i, j]
            assert grid.best_cell(metric, mask=mask) == (i, j, slots[i, j]), (metric, i, j)
            checked += 1
            if checked >= 40:
                break
        assert checked >= 1
    tof_slots = grid.best_slot("tof_days")
    ties = qualifying.sum(axis=-1) > 1
    assert (tof_slots[ties] != 0).any()  # the tie-break decided somewhere, not the slot order


def test_one_cells_arcs_are_picked_by_the_same_rule(relay):
    """select_arc (the arc and launch commands, the dashboard's selected cell) once picked the
    first arc among equal metrics; it now agrees with the grid's per-cell best slot."""
    from solver.window.cell import select_arc, solve_cell

    case, grid = relay
    slots = grid.best_slot("tof_days")
    i, j = (int(k[0]) for k in np.nonzero((grid.within.sum(axis=-1) > 1) & (slots != 0)))
    arcs = solve_cell(case, float(grid.departure_jd_tdb[i]), float(grid.arrival_jd_tdb[j]))
    chosen = select_arc(arcs, metric="tof_days")
    assert arcs.index(chosen) == slots[i, j]
    within = [a for a in arcs if a.within]
    assert chosen.metrics["dv_total_km_s"] == min(a.metrics["dv_total_km_s"] for a in within)
