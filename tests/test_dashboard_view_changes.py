"""How a view changes (app/dashboard/view_changes.py) and the controls made from the table of
case settings (app/dashboard/controls.py), without a browser, on the sample cases."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import pytest

from app.dashboard.case_catalogue import CaseCatalogue
from app.dashboard.controls import (
    CONTROL_BY_KEY,
    CONTROL_IDS,
    CONTROLS,
    ERROR_TARGETS,
    SLIDERS,
    error_target,
)
from app.dashboard.view_changes import (
    MESSAGE_CHARS,
    ViewInputs,
    apply_controls,
    errors_by_target,
    plan_view,
    short,
)
from app.dashboard.view_state import FIELDS, ViewState, control_values, to_query
from solver.errors import InputError
from solver.window.case import load_case
from solver.window.settings import SETTINGS

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_cases"
TALLIS = SAMPLES / "tallis_rendezvous.toml"
BASE = ViewState(arcs="0")  # the default case's own view (single revolution)


@pytest.fixture(scope="module")
def cases(tmp_path_factory):
    return CaseCatalogue(SAMPLES, tmp_path_factory.mktemp("uploads"))


def controls_of(case) -> dict:
    """What the page's controls hold when they show ``case``."""
    values = control_values(case)
    return {**{c.key: values[c.key] for c in CONTROLS}, "dep": values["dep"], "arr": values["arr"]}


# ---------------------------------------------------------------------------------------------
# Controls from the one table of settings


def test_every_dashboard_setting_has_a_control_a_label_and_a_link_name():
    """Adding a setting is one entry in SETTINGS: its control, id, label, unit, panel, link
    parameter and refused-value message all come from there."""
    with_controls = [s for s in SETTINGS if s.control in ("number", "dropdown") and s.url]
    assert [c.setting for c in CONTROLS] == with_controls
    assert {f.url for f in FIELDS} == {s.url for s in SETTINGS if s.url}
    for control in CONTROLS:
        assert control.id == ("dropdown-" if control.widget == "dropdown" else "input-") + (
            control.setting.url
        )
        assert control.label == control.setting.label
        assert error_target(control.key) == control.setting.url
    ranges = [s.key for s in SETTINGS if s.control == "range"]
    assert sorted(k for s in SLIDERS for k in (s.start_key, s.end_key)) == sorted(ranges)
    assert len(set(ERROR_TARGETS)) == len(ERROR_TARGETS)
    assert CONTROL_IDS["limits.c3_max_km2_s2"] == "input-c3max"


def test_a_control_reads_its_value_with_the_settings_own_words():
    c3 = CONTROL_BY_KEY["limits.c3_max_km2_s2"]
    assert c3.read("12.5") == 12.5 and c3.read(None) is None and c3.read("") is None
    with pytest.raises(InputError, match=r"limits\.c3_max_km2_s2 = -5 .*0 to 10000"):
        c3.read(-5)
    revs = CONTROL_BY_KEY["transfer.max_revolutions"]
    assert revs.read(2.0) == 2 and isinstance(revs.read(2.0), int)
    with pytest.raises(InputError, match="integer"):
        revs.read(1.5)
    with pytest.raises(InputError, match=r"window\.departure_step_days = 0\.0 "):
        CONTROL_BY_KEY["window.departure_step_days"].read(0.0)
    with pytest.raises(InputError):
        CONTROL_BY_KEY["window.departure_step_days"].read(None)  # a step is never optional
    mode = CONTROL_BY_KEY["arrival_orbit.mode"]
    assert mode.read("Flyby") == "flyby"


# ---------------------------------------------------------------------------------------------
# Controls into a view


def test_unchanged_controls_make_no_changes_and_changed_ones_are_kept(cases):
    view = BASE
    case = load_case(TALLIS)
    values = controls_of(case)
    same, _, errors = apply_controls(cases, view, values)
    assert same == view and errors == {}
    values["limits.c3_max_km2_s2"] = 25
    values["dep"] = [values["dep"][0] + 10.0, values["dep"][1]]
    values["departure_orbit.altitude_km"] = ""  # an emptied box removes the setting
    new, changed, errors = apply_controls(cases, view, values)
    assert errors == {}
    assert new.change_dict() == {
        "limits.c3_max_km2_s2": 25,
        "window.departure_start": "2035-10-11",
        "departure_orbit.altitude_km": None,
    }
    assert changed.limits.c3_max_km2_s2 == 25 and changed.parking_altitude_km is None
    # back to the case file's own value: the link no longer carries it
    values["limits.c3_max_km2_s2"] = 30
    again, _, _ = apply_controls(cases, new, values)
    assert "limits.c3_max_km2_s2" not in again.change_dict()


def test_minute_steps_show_six_digits_and_read_back_unchanged(cases):
    view = ViewState(case="kestrel_relay_leo", metric="dv_total_km_s", arcs="best")
    case = load_case(SAMPLES / "kestrel_relay_leo.toml")
    values = controls_of(case)
    assert values["window.departure_step_days"] == 0.00347222
    assert apply_controls(cases, view, values)[0] == view
    values["window.departure_step_days"] = 0.0034  # a real change is still heard
    new, _, _ = apply_controls(cases, view, values)
    assert new.change_dict() == {"window.departure_step_days": 0.0034}


def test_a_refused_value_is_reported_on_its_control_and_the_rest_still_applies(cases):
    """Issue: a refused value (C3 limit -5) stayed in its box and every later change was
    refused with the same message, so a later mistake (TOF min 500 > TOF max 450) was never
    reported. Now each refused value is reported on its own control, all of them together,
    and every other change applies."""
    view = BASE
    values = controls_of(load_case(TALLIS))
    values["limits.c3_max_km2_s2"] = -5
    new, _, errors = apply_controls(cases, view, values, ["limits.c3_max_km2_s2"])
    assert new == view and set(errors) == {"limits.c3_max_km2_s2"}
    assert "0 to 10000" in errors["limits.c3_max_km2_s2"]
    values["limits.tof_min_days"] = 500
    new, _, errors = apply_controls(cases, view, values, ["limits.tof_min_days"])
    assert new == view and set(errors) == {"limits.c3_max_km2_s2", "limits.tof_min_days"}
    assert "tof_min_days (500)" in errors["limits.tof_min_days"]
    values["window.departure_step_days"] = 2
    new, _, errors = apply_controls(cases, view, values, ["window.departure_step_days"])
    assert new.change_dict() == {"window.departure_step_days": 2}  # accepted despite both
    assert set(errors) == {"limits.c3_max_km2_s2", "limits.tof_min_days"}
    # a later change that makes a refused value acceptable lets it apply
    values["limits.tof_max_days"] = 600
    new, _, errors = apply_controls(cases, new, values, ["limits.tof_max_days"])
    assert new.change_dict()["limits.tof_min_days"] == 500
    assert new.change_dict()["limits.tof_max_days"] == 600
    assert set(errors) == {"limits.c3_max_km2_s2"}
    shown, rest = errors_by_target(errors)
    assert set(shown) == {"c3max"} and rest == []


def test_a_grid_over_the_cap_is_refused_on_the_step_that_made_it(cases):
    values = controls_of(load_case(TALLIS))
    values["window.departure_step_days"] = 0.001
    new, _, errors = apply_controls(cases, BASE, values, ["window.departure_step_days"])
    assert new == BASE
    assert "cell-arcs" in errors["window.departure_step_days"]


def test_dates_outside_the_dashboards_range_are_refused_on_the_slider(cases):
    values = controls_of(load_case(TALLIS))
    values["dep"] = [-65000.0, -64990.0]  # the year 1792
    new, _, errors = apply_controls(cases, BASE, values, ["dep"])
    assert new == BASE
    shown, _ = errors_by_target(errors)
    assert "window.departure_start" in shown["dep"]


def test_messages_are_one_readable_line():
    text = short("a\nb " + "x" * 1000)
    assert "\n" not in text and len(text) <= MESSAGE_CHARS


# ---------------------------------------------------------------------------------------------
# What fired, and the next view


def _plan(cases, inputs, current):
    from app.dashboard.window_service import WindowService

    service = WindowService.__new__(WindowService)  # its view helpers only, no threads
    service.catalogue = cases
    service._bodies = __import__("app.dashboard.window_service", fromlist=["_Memo"])._Memo()
    service._shelf = None
    return plan_view(
        inputs,
        current,
        cases=cases,
        from_link=service.view_from_url,
        for_case=service.view_for_case,
        select=service.select_point,
    )


def test_a_page_load_reads_the_link_and_fills_every_control(cases):
    plan = _plan(cases, ViewInputs("page", search="?case=vesper_venus_orbiter&c3max=20"), None)
    assert plan.fill and plan.view.case == "vesper_venus_orbiter"
    assert plan.view.change_dict() == {"limits.c3_max_km2_s2": 20.0}
    assert plan.errors == {} and plan.notes == []
    # a refused stored view reads the link again
    plan = _plan(cases, ViewInputs("metric", search="?case=kestrel_relay_leo", metric="x"), None)
    assert plan.fill and plan.view.case == "kestrel_relay_leo"


def test_the_case_picker_metric_arcs_and_a_click(cases):
    current = BASE
    plan = _plan(cases, ViewInputs("case", case_id="vesper_venus_orbiter"), current)
    assert plan.fill and plan.view.case == "vesper_venus_orbiter"
    assert _plan(cases, ViewInputs("case", case_id="tallis_rendezvous"), current).view is None
    plan = _plan(cases, ViewInputs("case", case_id="../../etc/passwd"), current)
    assert plan.view is None and "a sample case name" in plan.notes[0]
    plan = _plan(cases, ViewInputs("metric", metric="dla_deg"), current)
    assert plan.view == replace(current, metric="dla_deg") and plan.errors is None
    assert _plan(cases, ViewInputs("metric", metric="<script>"), current).view is None
    assert _plan(cases, ViewInputs("arcs", arcs="2H"), current).view is None  # not offered
    click = {"points": [{"x": "2036-03-01 07:10", "y": 2103249000000.0}]}
    plan = _plan(cases, ViewInputs("click", click=click), current)
    assert plan.view.selected[0] == "2036-03-01T00:00:00Z"
    assert to_query(plan.view).endswith("sel=2036-03-01T00:00:00Z~2036-08-25T00:00:00Z")
    plan = _plan(cases, ViewInputs("click", click={"points": [{"x": "soon", "y": 1}]}), current)
    assert plan.view is None and plan.notes
    assert _plan(cases, ViewInputs("click", click="garbage"), current).view is None


def test_controls_that_change_nothing_change_nothing(cases):
    values = controls_of(load_case(TALLIS))
    plan = _plan(cases, ViewInputs("controls", values=values), BASE)
    assert plan.view is None and plan.errors == {}


def test_fewer_revolutions_drop_a_branch_no_longer_offered(cases):
    view = ViewState(case="kestrel_relay_leo", metric="dv_total_km_s", arcs="3H")
    values = controls_of(load_case(SAMPLES / "kestrel_relay_leo.toml"))
    values["transfer.max_revolutions"] = 1
    new, case, _ = apply_controls(cases, view, values, ["transfer.max_revolutions"])
    assert case.max_revolutions == 1 and new.arcs == "best"
