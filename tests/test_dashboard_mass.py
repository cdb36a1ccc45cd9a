"""The window page's kilograms and launch minutes, without a browser: mass metrics on the map
(colour scale, limit line, cells without mass, hover), the launch vehicle and minimum delivered
mass as controls and link parameters, the details panel's mass budget, vehicles and daily
launch window, and the downloads.

The numbers the panel shows are checked against sources outside the dashboard: Tsiolkovsky's
rocket equation with standard gravity g0 = 9.80665 m/s² (docs/references.md 11.1; common
practice) and scipy's PCHIP read of the vehicle's table (docs/references.md 11.2), written out
here; the launch window's own check against a one-second brute force is in
tests/test_daily_window.py.
"""

from __future__ import annotations

import base64
import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from dash import Patch
from scipy.interpolate import PchipInterpolator

from app.dashboard import figures
from app.dashboard.case_catalogue import CaseCatalogue
from app.dashboard.config import Settings
from app.dashboard.controls import CONTROL_BY_KEY, CONTROL_IDS, controls_of
from app.dashboard.detail_rows import DetailNotes, DetailTable, detail_rows
from app.dashboard.display_data import arc_details, limits_block, map_data, map_point
from app.dashboard.launch_details import mass_summary
from app.dashboard.slowdown import Slowdown
from app.dashboard.view_changes import apply_controls
from app.dashboard.view_state import ViewState, control_values, from_query, to_query
from app.dashboard.window_service import WindowService
from solver.ephemeris.timescales import utc_to_jd_tdb
from solver.launch.daily_window import LEFT_OUT
from solver.window.arc_launch import arc_launch_window
from solver.window.case import load_case
from solver.window.case_bodies import CaseBodies
from solver.window.case_launch import MassModel
from solver.window.cell import select_arc, solve_cell
from solver.window.grid import compute_window

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_cases"
G0_KM_S2 = 9.80665e-3  # standard gravity, exact by definition (docs/references.md 11.1)
VESPER_CELL = ("2031-06-01", "2031-11-01")  # within the Vesper case's limits


@pytest.fixture(scope="module")
def cases(tmp_path_factory):
    return CaseCatalogue(SAMPLES, tmp_path_factory.mktemp("uploads"))


@pytest.fixture
def service(tmp_path):
    s = WindowService(
        Settings.resolve(tmp_path / "cache", tmp_path / "data", SAMPLES), slowdown=Slowdown()
    )
    yield s
    s.shutdown()


@pytest.fixture(scope="module")
def orrery():
    case = load_case(SAMPLES / "orrery_jupiter_flyby.toml")  # delivered_mass_min_kg = 1200
    return case, compute_window(case)


def vesper_arc(case):
    dep, arr = (float(utc_to_jd_tdb(d)) for d in VESPER_CELL)
    return select_arc(solve_cell(case, dep, arr), 0, "single")


def number(text: str) -> float:
    return float(text.replace(",", ""))


# ---------------------------------------------------------------------------------------------
# Controls and links


def test_the_vehicle_and_the_minimum_mass_are_controls_with_link_names():
    massmin = CONTROL_BY_KEY["limits.delivered_mass_min_kg"]
    vehicle = CONTROL_BY_KEY["spacecraft.vehicle"]
    assert CONTROL_IDS["limits.delivered_mass_min_kg"] == "input-massmin"
    assert CONTROL_IDS["spacecraft.vehicle"] == "dropdown-vehicle"
    assert massmin.panel == "limits" and vehicle.panel == "mass"
    assert massmin.read("1200") == 1200.0 and massmin.read("") is None
    assert vehicle.read(" Heron M ") == "Heron M"
    assert vehicle in controls_of("mass") and massmin in controls_of("limits")


def test_a_link_carries_the_vehicle_and_the_minimum_mass(service):
    view, case, notes = service.view_from_url(
        "?case=tallis_rendezvous&vehicle=Corvid%202&massmin=400&metric=delivered_mass_kg"
    )
    assert notes == []
    assert case.mass.vehicle.name == "Corvid 2" and case.limits.delivered_mass_min_kg == 400.0
    assert view.metric == "delivered_mass_kg"
    query = to_query(view)
    assert "vehicle=Corvid%202" in query and "massmin=400" in query
    assert from_query(query) == view
    view, case, notes = service.view_from_url("?case=tallis_rendezvous&vehicle=Osprey")
    assert case.mass.vehicle.name == "Heron M"  # the case's own, and the link part is named
    assert any("spacecraft.vehicle" in n and "Osprey" in n for n in notes)


def test_the_vehicle_control_shows_the_vehicle_in_use_and_changes_only_when_picked(cases):
    """Tallis names no vehicle: the first listed (Heron M) is in use, and the picker showing
    it is no change (no new grid, nothing in the link); another vehicle is a change."""
    view = ViewState(arcs="0")
    case = load_case(SAMPLES / "tallis_rendezvous.toml")
    values = {
        **{c.key: control_values(case)[c.key] for c in CONTROL_BY_KEY.values()},
        "dep": control_values(case)["dep"],
        "arr": control_values(case)["arr"],
    }
    assert values["spacecraft.vehicle"] == "Heron M"
    same, _, errors = apply_controls(cases, view, values)
    assert same == view and errors == {}
    values["spacecraft.vehicle"] = "Corvid 2"
    picked, changed, errors = apply_controls(cases, view, values, ["spacecraft.vehicle"])
    assert errors == {} and picked.change_dict() == {"spacecraft.vehicle": "Corvid 2"}
    assert changed.mass.vehicle.name == "Corvid 2"
    values["spacecraft.vehicle"] = "Heron M"
    back, _, _ = apply_controls(cases, picked, values, ["spacecraft.vehicle"])
    assert back.change_dict() == {}
    values["spacecraft.vehicle"] = "Osprey"  # not one of the case's vehicles
    _, _, errors = apply_controls(cases, view, values, ["spacecraft.vehicle"])
    assert "spacecraft.vehicle" in errors and "Corvid 2" in errors["spacecraft.vehicle"]


def test_mass_metrics_are_offered_where_the_case_computes_them(service):
    tallis = load_case(SAMPLES / "tallis_rendezvous.toml")
    offered = [o["value"] for o in service.metric_options(tallis)]
    assert {"injected_mass_kg", "delivered_mass_kg", "mass_margin_kg"} <= set(offered)
    no_required = replace(tallis, mass=replace(tallis.mass, required_delivered_mass_kg=None))
    offered = [o["value"] for o in service.metric_options(no_required)]
    assert "delivered_mass_kg" in offered and "mass_margin_kg" not in offered
    no_mass = replace(tallis, mass=MassModel())
    offered = [o["value"] for o in service.metric_options(no_mass)]
    assert not {"injected_mass_kg", "delivered_mass_kg"} & set(offered)
    assert service.suited_metric(no_mass, "delivered_mass_kg") == "c3_km2_s2"
    assert service.suited_metric(tallis, "mass_margin_kg") == "mass_margin_kg"


# ---------------------------------------------------------------------------------------------
# The map of a metric where more is better


def test_colour_range_runs_from_the_limit_or_median_up_to_the_most_kilograms():
    values = np.array([[900.0, 1500.0, np.nan], [2100.0, 600.0, 1200.0]])
    # more is better: from the limit (or the median, 1200) up to the largest value
    assert figures.colour_range(values, 1000.0, "delivered_mass_kg", True) == (1000.0, 2100.0)
    assert figures.colour_range(values, None, "delivered_mass_kg", True) == (1200.0, 2100.0)
    assert figures.colour_range(values, 5000.0, "delivered_mass_kg", True) == (1200.0, 2100.0)
    lo, hi = figures.colour_range(np.full((2, 2), 800.0), None, "delivered_mass_kg", True)
    assert hi == 800.0 and lo < hi


@pytest.mark.parametrize(
    "step, fmt", [(100.0, ",.0~f"), (2.5, ",.1~f"), (0.25, ",.2~f"), (5.0, ",.0~f"), (0.2, ",.1~f")]
)
def test_contour_labels_carry_the_decimals_of_their_step(step, fmt):
    assert figures.label_format(step) == fmt


def test_delivered_mass_map_reads_like_a_c3_map_turned_over(orrery):
    case, grid = orrery
    data = map_data(grid, "delivered_mass_kg", "0")
    assert data.higher_is_better and data.limit == 1200.0 and data.limit_bound == "min"
    assert data.limit_label == "delivered mass min 1,200 kg"
    values = grid.metric("delivered_mass_kg")[..., 0].T
    # cells with an arc but no mass (C3 beyond the vehicle's table) answer clicks like cells
    # with no arc
    has_arc = grid.converged[..., 0].T
    assert (data.no_value == ~(has_arc & np.isfinite(values))).all()
    assert (has_arc & np.isnan(values)).any()
    fig = figures.window_map_figure(data)
    heat = fig.data[figures.MAP_TRACE["values"]]
    assert heat.reversescale and heat.zmin == 1200.0
    assert heat.zmax == pytest.approx(np.nanmax(values))
    line = fig.data[figures.MAP_TRACE["limit"]]
    assert line.visible and line.name == "delivered mass min 1,200 kg"
    assert line.contours.start == line.contours.end == 1200.0
    # the line separates cells meeting the limit from those that do not: both sides are drawn
    drawn = np.asarray(line.z, dtype=float)
    assert np.nanmin(drawn) < 1200.0 < np.nanmax(drawn)
    no_value = fig.data[figures.MAP_TRACE["no_value"]]
    assert "no delivered mass" in no_value.hovertemplate
    # the star is the arc of most delivered mass within the limits
    i, j, k = grid.best_cell("delivered_mass_kg")
    within = np.where(grid.within[..., 0], grid.metric("delivered_mass_kg")[..., 0], np.nan)
    assert grid.metric("delivered_mass_kg")[i, j, k] == np.nanmax(within)
    arc = select_arc(solve_cell(case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j]), 0)
    star = figures.marker_layout(map_point(arc, "delivered_mass_kg", "best arc"), None, "kg")
    assert star["annotations"][0]["hovertext"] == f"best arc: {np.nanmax(within):,.0f} kg"


def test_limit_lines_on_the_other_metrics(orrery):
    _, grid = orrery
    c3 = map_data(grid, "c3_km2_s2", "0")
    assert c3.limit == 95.0 and not c3.higher_is_better and c3.limit_label == "C3 max 95 km²/s²"
    tof = figures.window_map_figure(map_data(grid, "tof_days", "0"))
    assert not tof.data[figures.MAP_TRACE["limit"]].visible  # bounded both ways: no one line
    fig = figures.window_map_figure(c3)
    assert not fig.data[figures.MAP_TRACE["values"]].reversescale


def test_a_metric_patch_turns_the_scale_and_moves_the_limit_line(orrery):
    _, grid = orrery
    data = map_data(grid, "delivered_mass_kg", "0")
    patch = figures.map_metric_patch(Patch(), data).to_plotly_json()
    sets = {tuple(op["location"]): op["params"]["value"] for op in patch["operations"]}
    values, limit, no_value = (figures.MAP_TRACE[k] for k in ("values", "limit", "no_value"))
    assert sets[("data", values, "reversescale")] is True
    assert sets[("data", limit, "contours")]["start"] == 1200.0
    assert sets[("data", limit, "visible")] is True
    assert "no delivered mass" in sets[("data", no_value, "hovertemplate")]
    mask = np.frombuffer(base64.b64decode(sets[("data", no_value, "z")]["bdata"]), np.float32)
    assert int(np.isfinite(mask).sum()) == int(data.no_value.sum())


def test_no_arc_within_a_minimum_mass_names_it_and_shows_the_heaviest_arc(orrery):
    case, _ = orrery
    heavy = case.with_changes(**{"limits.delivered_mass_min_kg": 50_000.0})
    grid = compute_window(heavy)
    bodies = CaseBodies.of(heavy)
    block = limits_block(heavy, grid, "delivered_mass_kg", "0", bodies)
    assert block.ranked_by == "delivered_mass_kg"
    mass = grid.metric("delivered_mass_kg")[..., 0]
    assert block.closest.metrics["delivered_mass_kg"] == pytest.approx(np.nanmax(mass))
    assert any("delivered mass" in b for b in block.breaches)
    # lifting the mass limit alone admits the arcs that meet every other limit, the launch
    # site's reach included (the grid's own rule: solver.window.limits)
    admitted = dict(block.excluded_by)["delivered mass min"]
    others = replace(heavy, limits=replace(heavy.limits, delivered_mass_min_kg=None))
    assert admitted == int(compute_window(others).within[..., 0].sum())
    assert "the launch site's reach" in dict(block.breaking)


def test_no_arc_with_a_mass_falls_back_to_the_cases_own_metric():
    case = load_case(SAMPLES / "vesper_venus_orbiter.toml")
    no_engine = replace(case, mass=replace(case.mass, propulsion=()))  # nobody captures
    grid = compute_window(no_engine)
    assert np.isnan(grid.metric("delivered_mass_kg")).all()
    block = limits_block(no_engine, grid, "delivered_mass_kg", "0", CaseBodies.of(no_engine))
    assert block.ranked_by == "c3_km2_s2" and block.closest is not None


# ---------------------------------------------------------------------------------------------
# The details panel


def test_mass_budget_follows_the_vehicle_table_and_the_rocket_equation():
    """Heron M on a Vesper arc, worked out here: the vehicle's curve by scipy's PCHIP less its
    35 kg adapter (docs/references.md 11.2), under the 2800 kg wet mass limit; the arrival burn
    by Tsiolkovsky's equation at Isp 321 s (docs/references.md 11.1)."""
    case = load_case(SAMPLES / "vesper_venus_orbiter.toml").with_changes(
        **{"spacecraft.vehicle": "Heron M"}
    )
    arc = vesper_arc(case)
    table = [(0, 1650), (5, 1380), (10, 1150), (15, 950), (20, 780), (30, 500), (40, 290)]
    c3, mass = np.array(table, dtype=float).T
    capability = float(PchipInterpolator(c3, mass)(arc.metrics["c3_km2_s2"])) - 35.0
    injected = min(capability, 2800.0)
    dv = arc.metrics["dv_arrival_km_s"]
    delivered = injected * math.exp(-dv / (321.0 * G0_KM_S2))
    sections = arc_details(case, arc, {})
    rows = detail_rows(sections)
    budget = {label: row for (heading, label), row in rows.items() if heading == "Mass budget"}
    assert budget["launch vehicle"].value == "Heron M"
    assert number(budget["capability"].value) == pytest.approx(capability, abs=0.051)
    assert number(budget["injected mass"].value) == pytest.approx(injected, abs=0.051)
    assert number(budget["arrival propellant"].value) == pytest.approx(
        injected - delivered, abs=0.051
    )
    assert number(budget["delivered mass"].value) == pytest.approx(delivered, abs=0.051)
    assert number(budget["margin"].value) == pytest.approx(delivered - 1500.0, abs=0.051)
    assert budget["arrival burn"].value == "bipropellant main engine, Isp 321 s"
    assert budget["departure burn"].value == "launch vehicle"
    assert {row.unit for label, row in budget.items() if "mass" in label} == {"kg"}
    compared = dict(sections)["Launch vehicles"]
    assert isinstance(compared, DetailTable)
    assert [r[0] for r in compared.rows] == ["Corvid 2", "Heron M"] and compared.current == 1
    assert compared.columns == ("vehicle", "injected (kg)", "delivered (kg)")
    assert number(compared.rows[1][2]) == pytest.approx(delivered, abs=0.051)


def test_launch_window_shows_each_opening_of_the_departure_day():
    case = load_case(SAMPLES / "vesper_venus_orbiter.toml")
    arc = vesper_arc(case)
    report = arc_launch_window(case, arc).as_dict()
    window = report["window"]
    sections = arc_details(case, arc, {})
    headings = [h for h, _ in sections]
    assert f"Launch window {VESPER_CELL[0]} (UTC)" in headings
    rows = detail_rows(sections)
    site = rows[(f"Launch window {VESPER_CELL[0]} (UTC)", "site")]
    assert site.value == "Marram Point"
    total = rows[(f"Launch window {VESPER_CELL[0]} (UTC)", "open in all")]
    assert total.unit == "min"
    assert number(total.value) == pytest.approx(
        sum(o["minutes"] for o in window["openings"]), abs=0.051
    )
    n = len(window["openings"])
    assert n >= 1
    for k, opening in enumerate(window["openings"], start=1):
        heading = f"Opening {k} of {n}"
        assert rows[(heading, "opens")].value == opening["open_utc"][11:19]
        assert rows[(heading, "opens")].unit == "UTC"
        assert rows[(heading, "lasts")].unit == "min"
        assert rows[(heading, "azimuth")].unit == "deg"
    notes = [c for h, c in sections if isinstance(c, DetailNotes)]
    assert notes and notes[0].items == LEFT_OUT


def test_no_mass_and_no_site_add_no_sections():
    case = load_case(SAMPLES / "vesper_venus_orbiter.toml")
    bare = replace(case, mass=MassModel(), launch_site=None)
    headings = [h for h, _ in arc_details(bare, vesper_arc(bare), {})]
    assert not any(h.startswith(("Mass", "Launch", "Opening")) for h in headings)
    assert "No spacecraft mass" in mass_summary(bare, CaseBodies.of(bare))[0]
    lines = mass_summary(case, CaseBodies.of(case))
    assert any("Marram Point" in line for line in lines)
    assert any("arrival by bipropellant main engine (Isp 321 s)" in line for line in lines)


# ---------------------------------------------------------------------------------------------
# Downloads


def test_the_dashboards_arc_json_is_the_command_lines(capsys):
    """The arc JSON download carries the mass budget, the vehicles and the launch window as
    `arcwindow arc --json` prints them (the same writer)."""
    from app.cli import main
    from app.dashboard.exports import arc_json

    case = load_case(SAMPLES / "vesper_venus_orbiter.toml")
    ours = json.loads(arc_json(case, vesper_arc(case)))
    argv = ["arc", "vesper_venus_orbiter", "--depart", VESPER_CELL[0], "--arrive", VESPER_CELL[1]]
    assert main([*argv, "--revs", "0", "--json"]) == 0
    cli = json.loads(capsys.readouterr().out)
    for key in ("mass_budget", "vehicles", "launch_window", "mass_reason"):
        assert ours[key] == cli[key], key
    assert ours["units"]["delivered_mass_kg"] == "kg"
    assert ours["metrics"]["delivered_mass_kg"] == pytest.approx(
        ours["mass_budget"]["delivered_mass_kg"]
    )


def test_the_dashboards_grid_csv_has_the_mass_columns(tmp_path):
    """The page's "grid CSV" download is the file GridExports writes for the view's grid."""
    from app.dashboard.downloads import GridExports

    case = load_case(SAMPLES / "vesper_venus_orbiter.toml")
    exports = GridExports(service=None, folder=tmp_path)  # file_for needs no service
    text = exports.file_for(compute_window(case), "csv").read_text()
    columns = next(line for line in text.splitlines() if not line.startswith("#")).split(",")
    for name in ("injected_mass_kg", "delivered_mass_kg", "mass_margin_kg", "mass_reason"):
        assert name in (column.strip('"') for column in columns), name
