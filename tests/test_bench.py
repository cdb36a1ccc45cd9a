"""The benchmark sections run in quick mode and report ratios (no timing assertions here:
speed goals live in `arcwindow bench`)."""

from __future__ import annotations

import json
from pathlib import Path

from app.bench import run_sections
from app.cli import main


def test_quick_lambert_and_grid_sections_report_ratios():
    lines = run_sections(["lambert", "grid"], size="quick")
    names = [line.name for line in lines]
    assert any("single-revolution" in n for n in names)
    assert any("cache hit" in n for n in names)
    for line in lines:
        assert line.value > 0
        if line.baseline_value is not None:
            assert line.ratio and line.ratio > 0


def test_bench_command_json(capsys):
    assert main(["bench", "--quick", "--section", "grid", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert {row["section"] for row in data} == {"grid"}


def test_lambert_baseline_solves_the_same_problem():
    """The benchmark's scalar baseline must compute the same arcs, or its ratio means nothing."""
    import numpy as np

    from app.bench.lambert_bench import baseline_lambert, random_cases
    from solver.mechanics.lambert import solve_lambert

    r1, r2, tof, mu = random_cases(100)
    sol = solve_lambert(r1, r2, tof, mu)
    for i in range(100):
        v1, v2 = baseline_lambert(r1[i], r2[i], tof[i], mu[i])
        assert np.linalg.norm(v1 - sol.v1_km_s[i, 0]) <= 1e-9 * np.linalg.norm(v1)
        assert np.linalg.norm(v2 - sol.v2_km_s[i, 0]) <= 1e-9 * np.linalg.norm(v2)


def test_quick_launch_section_reports_both_goals():
    lines = run_sections(["launch"], size="quick")
    assert [line.unit for line in lines] == ["s", "ms"]
    for line in lines:
        assert line.value > 0 and line.baseline_value and line.ratio and line.goal


def test_launch_window_baseline_finds_the_same_windows():
    """The sampled baseline must find the windows the closed form finds, or its ratio means
    nothing: the day's minutes agree to the sampling step."""
    from app.bench.launch_bench import sampled_window_minutes
    from solver.launch.daily_window import daily_launch_window
    from solver.launch.site import LaunchSite

    site = LaunchSite("s", 28.5, -80.6, 35.0, 55.0)
    for dla, rla in ((40.0, 200.0), (10.0, 120.0), (-20.0, 300.0)):
        ours = daily_launch_window(site, 2462870.5, dla, rla, 3.0, mu_km3_s2=398600.4)
        sampled = sampled_window_minutes(site, 2462870.5, dla, rla)
        assert abs(ours.total_minutes - sampled) <= 4.0 / 60.0  # a second per opening end


def test_sequence_bench_baseline_scores_the_same_candidates():
    """The loop baseline of the sequence section evaluates the same numbers as the batched
    call (the exact path against the compiled one), or its ratio means nothing."""
    import numpy as np

    from app.bench.sequence_bench import _five_leg

    model, spec, bounds = _five_leg()
    x = bounds[:, 0] + np.random.default_rng(2).uniform(size=(40, len(bounds))) * np.ptp(bounds, 1)
    batched = model.score(x)
    one_by_one = [model.costs(model.arcs(spec.epochs(row[None, :]))).score[0] for row in x]
    assert np.allclose(batched, one_by_one, rtol=1e-9, atol=1e-9)


def test_quick_sequence_evaluation_line_reports_a_ratio():
    from app.bench.sequence_bench import evaluation_lines

    line, against_stages = evaluation_lines("quick")
    assert line.value > 0 and line.baseline_value and line.ratio > 1
    assert "load average" in line.notes and line.extra["load_average"] >= 0
    assert against_stages.baseline_value and against_stages.ratio > 0


def test_instruction_counts_are_read_from_one_callgrind_dump_per_phase(tmp_path):
    """The counting run marks each phase with a sleep; callgrind writes one numbered dump per
    mark. The parser takes them in order (without running valgrind here)."""
    from app.bench.sequence_instructions import _part_number

    names = ["callgrind.out", "callgrind.out.10", "callgrind.out.2", "callgrind.out.1"]
    order = sorted((tmp_path / n for n in names), key=_part_number)
    assert [p.name for p in order] == [
        "callgrind.out.1", "callgrind.out.2", "callgrind.out.10", "callgrind.out"
    ]  # fmt: skip


def test_sequence_page_leg_map_baseline_evaluates_the_same_cells():
    """The leg-map baseline of the sequence page's bench lines (every cell evaluated whole)
    gives the leg map's own total Δv and limits, or its ratio means nothing."""
    import numpy as np

    from app.bench.sequence_page_bench import whole_map_inputs
    from solver.sequence.evaluate import SequenceModel
    from solver.sequence.leg_map import leg_axes, leg_map
    from solver.sequence.record import candidate_from_link
    from solver.sequence.spec import load_sequence_case

    sequence_case = load_sequence_case(
        Path(__file__).resolve().parents[1] / "sample_cases/sequences/harrow_jupiter_veega.toml"
    )
    link = {  # a candidate a search of this sample found (any dates would do)
        "seq": "earth-venus-earth-earth-jupiter",
        "at": "2034-08-14T01:50:32.171Z~2034-11-02T19:03:01.114Z~2035-09-10T15:05:49.010Z"
        "~2037-09-09T08:38:52.481Z~2040-06-30T13:58:34.836Z",
        "arcs": "0.0.*.0",
        "res": "15.135347/178.844036",
    }
    candidate = candidate_from_link(sequence_case, link)
    model = SequenceModel(sequence_case.case, sequence_case.sequence(candidate.sequence))
    epochs, angles = whole_map_inputs(model, candidate, 1, 6.0, 2.0)
    whole = model.costs(model.arcs(epochs, angles, fast=True), detail=True)
    a, b = model.spec.leg_epochs(1)
    start, end = leg_axes(candidate.epochs_jd_tdb, a, b, 6.0, 2.0)
    resonant = [
        [g.metrics["pitch_deg"], g.metrics["clock_deg"]]
        for g in candidate.legs
        if g.branch == "resonant"
    ]
    legmap = leg_map(model, candidate.epochs_jd_tdb, 1, start, end, angles_deg=resonant)
    shape = (len(start), len(end))  # the baseline is start-major; the map is (end, start)
    assert np.array_equal(whole.within.reshape(shape).T, legmap.within)
    assert legmap.within.any()
    dv = whole.objective.reshape(shape).T
    assert np.allclose(dv[legmap.within], legmap.values["dv_total_km_s"][legmap.within], rtol=1e-9)
