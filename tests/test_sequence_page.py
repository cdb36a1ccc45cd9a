"""The sequence page without a browser: its view and link, the settings it edits, its live loop,
its background jobs, its display data and its pure figure builders.

Physics checks use sources outside the page: the ephemeris (solver.ephemeris.states, checked
against astropy in tests/test_ephemeris.py) for where the arc view's legs start and end and for
the v∞ the encounter chart shows, and the two-body propagation of each leg's arc.
"""

from __future__ import annotations

import threading
import time
from dataclasses import asdict

import numpy as np
import pytest

from app.dashboard import sequence_figures, theme
from app.dashboard.display_data import display_ms
from app.dashboard.grid_jobs import GridJobs, Work
from app.dashboard.search_loop import SearchStatus, plan_draw, plan_poll, status_from_ticket
from app.dashboard.sequence_display import (
    HIGHER_IS_BETTER,
    candidate_details,
    candidate_rows,
    encounter_chart_data,
    leg_family_data,
    leg_map_data,
    sequence_scene,
)
from app.dashboard.sequence_view import (
    SequenceView,
    apply_changes,
    apply_settings,
    change_key,
    from_query,
    key_of_url,
    place_of,
    setting_values,
    to_query,
    url_name,
)
from app.dashboard.slowdown import Slowdown
from app.samples import resolve_sequence_case_path
from solver.constants import AU_KM
from solver.ephemeris.frames import ECLIPTIC
from solver.ephemeris.states import states
from solver.errors import InputError
from solver.sequence.evaluate import SequenceModel
from solver.sequence.leg_map import leg_axes, leg_map
from solver.sequence.result import evaluate_candidate
from solver.sequence.settings import SEQUENCE_SETTING
from solver.sequence.spec import load_sequence_case, sequence_case_from_dict

HARROW = "harrow_jupiter_veega"
HARROW_EPOCHS = [2464188.5776, 2464269.2946, 2464581.1298, 2465310.8611, 2466336.0831]
HARROW_ANGLES = [[15.135347, 178.844036]]


@pytest.fixture(scope="module")
def harrow():
    sequence_case = load_sequence_case(resolve_sequence_case_path(HARROW))
    model = SequenceModel(sequence_case.case, sequence_case.sequences[0])
    candidate = evaluate_candidate(model, HARROW_EPOCHS, angles_deg=HARROW_ANGLES)
    return sequence_case, model, candidate


def _document(name: str) -> dict:
    import tomllib

    return tomllib.loads(resolve_sequence_case_path(name).read_text(encoding="utf-8"))


# ---------------------------------------------------------------------------------------------
# The view and its link


def test_a_view_round_trips_through_its_link():
    view = SequenceView(
        case=HARROW,
        changes=tuple(
            sorted(
                {
                    "window.departure_start": "2034-02-01",
                    "limits.c3_max_km2_s2": 20.0,
                    "limits.dla_max_deg": None,
                    "sequence.legs[3].tof_max_days": 760.0,
                    "sequence.duration_max_days": 2700.0,
                    "sequence.legs[1].to": "mars",
                }.items()
            )
        ),
        mode="global",
        top=7,
        time_s=12.5,
        seed=3,
        cand=2,
        seq="earth-venus-earth-earth-jupiter",
        at=("2034-08-14T01:50:32.171Z", "2034-11-02T19:03:01Z", "2035-09-10", "2037-09-09", "x"),
        leg=2,
        metric="flyby_margin_km",
        span_days=30.0,
        step_days=0.5,
    )
    with pytest.raises(InputError, match="at"):
        SequenceView.from_dict(view.to_dict())  # "x" is no date
    view = SequenceView(**{**view.__dict__, "at": (*view.at[:-1], "2040-06-30T13:58:34Z")})
    query = to_query(view)
    assert "tofmax3=760" in query and "c3max=20" in query and "dlamax=none" in query
    assert "to1=mars" in query and "durmax=2700" in query and "dep=2034-02-01~" in query
    again = from_query(query, "other")
    assert again == view and not again.notes
    assert SequenceView.from_dict(view.to_dict()) == view
    # The search's identity leaves the selection out.
    assert to_query(view, selection=False) == to_query(view.search_part(), selection=False)
    assert "cand=" not in to_query(view, selection=False)


def test_unreadable_parts_of_a_link_are_named_and_dropped():
    view = from_query(
        "?case=../etc&cand=99&metric=colour&tofmin2=-5&nosuch=1&seq=x&dep=2034", "harrow"
    )
    assert view.case == "harrow" and view.cand == 1 and view.metric == "dv_total_km_s"
    assert view.changes == () and view.at is None and view.seq is None
    text = " ".join(view.notes)
    for part in ("../etc", "cand=99", "metric=colour", "sequence.legs[2].tof_min_days", "nosuch"):
        assert part in text, part
    assert "seq, arcs or res without at" in text and "dep is not" in text


def test_every_edited_setting_has_a_link_name_that_finds_it_again():
    keys = [
        "window.departure_start",
        "window.departure_step_days",
        "limits.vinf_arrival_max_km_s",
        change_key(SEQUENCE_SETTING["sequence.objective"]),
        change_key(SEQUENCE_SETTING["sequence.unpowered_only"], 2),
        change_key(SEQUENCE_SETTING["leg.stay_max_days"], 0, 3),
        change_key(SEQUENCE_SETTING["leg.altitude_min_km"], 2, 11),
    ]
    assert keys[3] == "sequence.objective" and keys[4] == "sequence[2].unpowered_only"
    assert keys[5] == "sequence.legs[3].stay_max_days"
    for key in keys[1:]:
        assert key_of_url(url_name(key)) == key, key
        assert place_of(key).setting.url is not None
    with pytest.raises(InputError):
        place_of("sequence.legs[1].resonance")  # not edited on the page


def test_changes_are_written_into_the_case_file_and_a_missing_leg_is_refused():
    document = _document(HARROW)
    changed = apply_changes(
        document,
        {
            "sequence.legs[2].tof_max_days": 480.0,
            "limits.c3_max_km2_s2": None,
            "window.departure_end": "2034-10-31",
        },
    )
    assert changed["sequence"]["legs"][1]["tof_max_days"] == 480.0
    assert "c3_max_km2_s2" not in changed["limits"]
    assert changed["window"]["departure_end"] == "2034-10-31"
    assert document["limits"]["c3_max_km2_s2"] == 25  # the original is untouched
    with pytest.raises(InputError, match=r"legs\[9\]"):
        apply_changes(document, {"sequence.legs[9].tof_min_days": 10.0})
    with pytest.raises(InputError, match=r"sequence\[2\]"):
        apply_changes(document, {"sequence[2].duration_max_days": 10.0})


def test_a_refused_setting_is_named_on_its_own_control_and_the_others_apply():
    document = _document(HARROW)

    def build(view: SequenceView):
        return sequence_case_from_dict(apply_changes(document, view.change_dict()))

    current = SequenceView(case=HARROW, cand=3)
    base = setting_values(build(current), array=False)
    values = dict(base)
    values["sequence.legs[1].tof_min_days"] = 300  # above its maximum (220): refused
    values["limits.c3_max_km2_s2"] = 30  # fine
    values["sequence.legs[2].tof_max_days"] = "many"  # not a number: refused alone
    view, sequence_case, errors = apply_settings(
        build, current, values, {"sequence.legs[1].tof_min_days"}, base, base
    )
    assert set(errors) == {"sequence.legs[1].tof_min_days", "sequence.legs[2].tof_max_days"}
    assert "tof_max_days" in errors["sequence.legs[1].tof_min_days"]
    assert "TOF min = 300" in errors["sequence.legs[1].tof_min_days"]
    assert view.change_dict() == {"limits.c3_max_km2_s2": 30.0}
    assert sequence_case.case.limits.c3_max_km2_s2 == 30.0
    assert view.cand == 1  # a new search: its first candidate
    # A larger maximum makes the refused minimum acceptable: both apply together.
    values["sequence.legs[1].tof_max_days"] = 400
    values["sequence.legs[2].tof_max_days"] = 500
    now = setting_values(sequence_case, array=False)
    view, sequence_case, errors = apply_settings(
        build, view, values, {"sequence.legs[1].tof_max_days"}, now, base
    )
    assert errors == {}
    assert sequence_case.sequences[0].legs[0].tof_min_days == 300.0
    # Back to the case file's own value: the change leaves the link.
    values["limits.c3_max_km2_s2"] = 25
    now = setting_values(sequence_case, array=False)
    view, _, _ = apply_settings(build, view, values, set(), now, base)
    assert "limits.c3_max_km2_s2" not in view.change_dict()


# ---------------------------------------------------------------------------------------------
# The live loop


def test_the_search_status_moves_on_like_the_maps():
    status = status_from_ticket("?case=a&cand=1", "k", "queued")
    assert status.phase == "solving" and not status.settled
    assert plan_draw(status, "?case=a&cand=1") == "waiting"
    assert plan_draw(status, "?case=a&cand=2") == "nothing"  # a status for another view
    running = plan_poll(status, status.view, {"phase": "running", "fraction": 0.4})
    assert running.status is None and running.interval_ms == 300
    assert "40%" in running.progress.text and running.progress.cancel
    ready = plan_poll(status, status.view, {"phase": "ready"})
    assert ready.status.phase == "ready" and ready.interval_ms is None
    assert plan_draw(ready.status, status.view) == "draw"
    # Lost twice: asked for again; a third time: reported, and polling stops.
    lost = status
    for restarts in (1, 2):
        plan = plan_poll(lost, lost.view, None)
        assert plan.action == "restart" and plan.status.restarts == restarts
        lost = plan.status
    plan = plan_poll(lost, lost.view, {"phase": "lost"})
    assert plan.status.phase == "failed" and plan.interval_ms is None
    assert "asked 3 times" in plan.status.message
    failed = plan_poll(status, status.view, {"phase": "failed", "message": "leg 3 is resonant"})
    assert "leg 3 is resonant" in failed.status.message and failed.progress.retry
    assert plan_draw(failed.status, status.view) == "error"
    stalled = plan_poll(status, status.view, {"phase": "running", "stalled": True})
    assert stalled.status.phase == "failed"
    assert plan_poll(status, "?case=b", {"phase": "ready"}).status is None
    assert SearchStatus.from_dict({"view": 1}) is None
    assert SearchStatus.from_dict(ready.status.to_dict()) == ready.status


def test_work_shares_the_grid_pool_with_waiters_cancel_and_reported_failures():
    jobs = GridJobs(None, slowdown=Slowdown())
    started = threading.Event()

    def slow(report, check):
        started.set()
        for k in range(200):
            time.sleep(0.01)
            report(k, 200)
        return "done"

    work = Work(key="search-a", lane="search", compute=slow, nbytes=lambda r: 10)
    first = jobs.submit(work, "viewer-1")
    second = jobs.submit(work, "viewer-2")
    assert first.phase in ("queued", "running") and jobs.waiters("search-a") == 2
    assert started.wait(5.0)
    assert jobs.cancel("search-a", "viewer-1")  # the other viewer still waits
    assert jobs.waiters("search-a") == 1
    assert jobs.cancel("search-a", "viewer-2")
    deadline = time.monotonic() + 5.0
    while jobs.ticket("search-a", "viewer-2").phase != "cancelled":
        assert time.monotonic() < deadline
        time.sleep(0.02)
    assert second.key == "search-a"

    def broken(report, check):
        raise InputError("sequence.legs[3].resonance", "2:1", "a sequence without resonant legs")

    jobs.submit(Work(key="search-b", lane="search", compute=broken, nbytes=len), "v")
    deadline = time.monotonic() + 5.0
    while (ticket := jobs.ticket("search-b", "v")).phase != "failed":
        assert time.monotonic() < deadline
        time.sleep(0.02)
    assert "sequence.legs[3].resonance" in ticket.message
    quick = Work(key="search-c", lane="search", compute=lambda r, c: "ok", nbytes=len)
    jobs.submit(quick, "v")
    assert jobs.wait("search-c", 5.0) == "ok"
    assert jobs.submit(quick, "w").phase == "ready"  # from memory
    with pytest.raises(ValueError):
        jobs.submit(Work(key="x", lane="nowhere", compute=slow, nbytes=len), "v")
    jobs.shutdown()


def test_a_cancel_whose_answer_the_page_lost_is_never_a_new_search():
    """The page's Cancel and its poll tick are requests of one callback: when a tick is in
    flight, the browser may drop the cancel's answer, so the page still says "solving". Its
    next ticks must find the cancel on the server and settle, not see a cancelled job as a
    lost one and start the search again. Made deterministic with the test-only search delay:
    the job sits in its delay while the ticks ask."""
    jobs = GridJobs(None, slowdown=Slowdown(search_s=2.0))
    calls = []

    def compute(report, check):
        calls.append(1)
        return "found"

    work = Work(
        key="search-z", lane="search", compute=compute, nbytes=len, pause=jobs.slowdown.search_pause
    )
    view = "?case=a&cand=1"
    status = status_from_ticket(view, "search-z", jobs.submit(work, "tab").phase)

    def tick_settles() -> None:
        plan = plan_poll(status, view, asdict(jobs.ticket("search-z", "tab")))
        assert plan.action != "restart"
        assert plan.status is not None and plan.status.phase == "cancelled"
        assert plan.interval_ms is None and plan.progress.retry

    assert jobs.cancel("search-z", "tab")  # the server cancelled; the page's answer was lost
    tick_settles()  # the job is still in its delay
    deadline = time.monotonic() + 10.0
    while jobs.ticket("search-z", "someone else").phase != "cancelled":  # the job heard it
        assert time.monotonic() < deadline
        time.sleep(0.05)
    tick_settles()
    assert calls == []  # never computed: the delay held it until the cancel
    # "Search again" (a new submit by the same tab) asks for it afresh.
    assert jobs.submit(work, "tab").phase in ("queued", "running")
    assert jobs.ticket("search-z", "tab").phase in ("queued", "running")
    jobs.shutdown()


def test_the_slowdown_setting_reads_a_search_delay():
    assert Slowdown.from_text("search=2.5").search_s == 2.5
    with pytest.raises(InputError, match="grid, refine, search, poll, map"):
        Slowdown.from_text("search=forever")
    assert Slowdown.from_text("map=2,poll=0.5").map_s == 2.0


# ---------------------------------------------------------------------------------------------
# Display data and figures


def test_the_arc_view_draws_every_leg_from_body_to_body(harrow):
    _sequence_case, model, candidate = harrow
    scene = sequence_scene(model, candidate)
    assert [leg.index for leg in scene.legs] == [1, 2, 3, 4]
    assert [m.index for m in scene.encounters] == [1, 2, 3, 4, 5]
    # Each leg starts and ends where the ephemeris puts its bodies (ecliptic, au), within the
    # drawing's own precision; the resonant leg ends where it started (the Earth has moved
    # on by its miss distance).
    for leg, result in zip(scene.legs, candidate.legs, strict=True):
        for xyz, body, jd, tol_km in (
            (leg.xyz[0], result.from_body, result.departure_jd_tdb, 1.0),
            (leg.xyz[-1], result.to_body, result.arrival_jd_tdb, 2.1e6),
        ):
            r, _ = states(body, jd, central="sun", frame=ECLIPTIC)
            tol = tol_km if result.branch == "resonant" else 1.0
            assert np.linalg.norm(xyz * AU_KM - np.asarray(r)) < tol, (leg.index, body)
    fig = sequence_figures.sequence_arc_view_figure(scene)
    legs = [t for t in fig.data if t.name and t.name.startswith("leg ")]
    assert len(legs) == 4 and len({t.line.color for t in legs}) == 4
    assert any(t.name == "bodies at the encounters" for t in fig.data)
    assert sum(1 for t in fig.data if t.name and t.name.endswith("orbit")) == 3  # E, V, J


def test_the_encounter_chart_shows_every_number_with_its_unit(harrow):
    _sequence_case, _model, candidate = harrow
    data = encounter_chart_data(candidate)
    assert len(data.rows) == 5
    flyby = data.rows[1]
    # v∞ in at the Venus flyby: the arriving leg's velocity minus Venus's (the ephemeris).
    leg = candidate.legs[0]
    _, v_venus = states("venus", leg.arrival_jd_tdb, central="sun")
    assert flyby.vinf_in_km_s == pytest.approx(
        float(np.linalg.norm(leg.v2_km_s - np.asarray(v_venus))), rel=1e-9
    )
    for text in ("v∞ in", "km/s", "turn angle", "deg", "periapsis altitude", "minimum altitude"):
        assert text in flyby.hover
    fig = sequence_figures.encounter_chart_figure(data)
    names = {t.name for t in fig.data if t.name}
    assert {"v∞ in", "v∞ out", "minimum altitude", "periapsis altitude", "Δv"} <= names
    bars = next(t for t in fig.data if t.type == "bar")
    assert len(bars.y) == 5 and bars.y[0] == pytest.approx(candidate.encounters[0].dv_km_s)
    # A flyby below its minimum is drawn in the error colour.
    low = type(flyby)(**{**flyby.__dict__, "altitude_km": 100.0, "altitude_min_km": 300.0})
    below = sequence_figures.encounter_chart_figure(type(data)([data.rows[0], low]))
    marks = next(t for t in below.data if t.name == "below its minimum")
    assert list(marks.x) == [1] and marks.marker.color == theme.ERROR_INK


def test_the_leg_map_marks_the_limits_the_candidate_and_the_ranked_one(harrow):
    _sequence_case, model, candidate = harrow
    a, b = model.spec.leg_epochs(0)
    start, end = leg_axes(candidate.epochs_jd_tdb, a, b, 8.0, 2.0)
    cells = leg_map(model, candidate.epochs_jd_tdb, 0, start, end, angles_deg=HARROW_ANGLES)
    data = leg_map_data(
        cells, "dv_total_km_s", candidate, candidate, limit=None, tof_bounds=(80.0, 220.0)
    )
    assert data.values.shape == (9, 9) and data.hover.shape == (9, 9, 7)
    assert np.array_equal(data.outside, np.isfinite(data.values) & ~cells.within)
    assert data.shown.departure_ms == float(display_ms(candidate.legs[0].departure_jd_tdb))
    fig = sequence_figures.leg_map_figure(data)
    assert fig.data[0].type == "heatmap" and fig.data[0].customdata is not None
    assert fig.layout.shapes[0].name == "shown"
    assert any(a.text == "★" for a in fig.layout.annotations)  # the ranked candidate's dates
    assert "Venus flyby" in fig.layout.yaxis.title.text
    margin = leg_map_data(
        cells, "flyby_margin_km", candidate, None, limit=None, tof_bounds=(80.0, 220.0)
    )
    assert "flyby_margin_km" in HIGHER_IS_BETTER
    assert sequence_figures.leg_map_figure(margin).data[0].reversescale


def test_the_family_chart_and_details_of_a_candidate(harrow):
    sequence_case, model, candidate = harrow
    family = leg_family_data(model, candidate, 0)
    assert family is not None and family.selected is not None
    assert family.title.startswith("leg 1:")
    assert leg_family_data(model, candidate, 2) is None  # the resonant return
    sections = dict(
        candidate_details(
            sequence_case, model, candidate, rank_text="1", provenance={"engine": "x"}
        )
    )
    counted = {row.label: row.value for row in sections["How each Δv is counted"]}
    assert "parking orbit" in counted["departure"] and "capture orbit" in counted["arrival"]
    assert "periapsis burn" in counted["flyby"]
    venus = {row.label: row for row in sections["2 · Venus flyby"]}
    assert venus["periapsis altitude"].unit == "km" and venus["v∞ in"].unit == "km/s"
    rows = candidate_rows([candidate])
    assert rows[0].bodies == "Earth › Venus › Earth › Earth › Jupiter"
    assert len(rows[0].dates) == 5 and rows[0].status == "within limits"
