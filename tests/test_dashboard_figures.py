"""Figure builders (pure: arrays in, figures out) and the arrays they are fed (no browser).

Physics checks use sources outside the dashboard: Lagrange's time-of-flight equation for the
family chart (Battin 1999, §4.5, via solver.mechanics.families, itself checked against published
values), the ephemeris for the arc view's end points, and astropy's time scales for the date
axis (UTC from TDB, astropy.time; the independent reference the project uses).
"""

from __future__ import annotations

import base64
import itertools
from pathlib import Path

import numpy as np
import plotly.graph_objects as go
import pytest
from dash import Patch

from app.dashboard import figures, theme
from app.dashboard.detail_rows import detail_rows
from app.dashboard.display_data import (
    HOVER_FIELDS,
    MASS_HOVER_FIELDS,
    MapPoint,
    arc_details,
    arc_scene,
    display_indices,
    display_ms,
    family_data,
    jd_tdb_to_unix_ms,
    map_data,
    map_point,
)
from solver.constants import AU_KM
from solver.ephemeris.frames import ECLIPTIC
from solver.ephemeris.states import states
from solver.mechanics.families import Family, tau_of_epsilon
from solver.window.case import load_case
from solver.window.case_bodies import CaseBodies
from solver.window.cell import select_arc, solve_cell
from solver.window.grid import compute_window
from solver.window.metrics import METRICS

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_cases"


@pytest.fixture(scope="module")
def tallis():
    case = load_case(SAMPLES / "tallis_rendezvous.toml")
    return case, compute_window(case)


@pytest.fixture(scope="module")
def kestrel():
    case = load_case(SAMPLES / "kestrel_relay_leo.toml")
    return case, compute_window(case)


# ---------------------------------------------------------------------------------------------
# Helpers of the builders


@pytest.mark.parametrize(
    "span, target, expected",
    [
        (100.0, 8, 20.0),
        (100.0, 10, 10.0),
        (18.0, 8, 2.5),
        (1.0, 6, 0.2),
        (7.3, 8, 1.0),
        (0.03, 6, 0.005),
    ],
)
def test_nice_step(span, target, expected):
    assert figures.nice_step(span, target) == pytest.approx(expected)


def test_colour_range_ends_at_the_limit_or_the_median():
    values = np.array([[5.0, 10.0, np.nan], [40.0, 80.0, 20.0]])
    assert figures.colour_range(values, 30.0, "c3_km2_s2") == (5.0, 30.0)
    assert figures.colour_range(values, None, "c3_km2_s2") == (5.0, 20.0)
    assert figures.colour_range(values, 30.0, "tof_days") == (5.0, 80.0)
    assert figures.colour_range(np.full((2, 2), np.nan), None, "c3_km2_s2") == (0.0, 1.0)


def test_tof_lines_hold_constant_flight_time():
    day = 86_400_000.0
    dep = np.arange(0.0, 200.0) * day
    arr = np.arange(50.0, 500.0) * day
    xs, ys, _, _, text = figures.tof_lines(dep, arr, 50.0, 499.0)
    assert text and all(t.endswith(" d") for t in text)
    pairs = [(x, y) for x, y in zip(xs, ys, strict=True) if x is not None]
    for k in range(0, len(pairs), 2):
        (x0, y0), (x1, y1) = pairs[k], pairs[k + 1]
        assert (y0 - x0) == pytest.approx(y1 - x1)  # one flight time along the line
        assert dep[0] <= x0 < x1 <= dep[-1] and arr[0] <= y0 and y1 <= arr[-1]
    hours = figures.tof_lines(np.array([0.0, 0.5]) * day, np.array([0.2, 1.0]) * day, 0.0, 1.0)[4]
    assert hours and all(t.endswith(" h") for t in hours)


# ---------------------------------------------------------------------------------------------
# Window map


def test_display_indices_keep_ends_and_cap_the_count():
    assert list(display_indices(5, 10)) == [0, 1, 2, 3, 4]
    idx = display_indices(1001, 600)
    assert idx[0] == 0 and idx[-1] == 1000 and len(idx) <= 600
    assert np.all(np.diff(idx) >= 1)


def test_map_data_is_the_grid_transposed_with_its_hover_numbers(tallis):
    case, grid = tallis
    data = map_data(grid, "c3_km2_s2", "0")
    n_dep, n_arr, _ = grid.shape
    assert data.values.shape == (n_arr, n_dep)
    # Every number of the arc, and the kilograms of a case with a spacecraft mass and a
    # required mass (Tallis has both).
    names = [name for name, *_ in data.hover_fields]
    assert names == [f[0] for f in HOVER_FIELDS] + [f[0] for f in MASS_HOVER_FIELDS]
    assert data.hover.shape == (n_arr, n_dep, len(names))
    i, j = 140, 210
    assert data.values[j, i] == pytest.approx(grid.arcs["c3_km2_s2"][i, j, 0], rel=1e-6)
    for k, name in enumerate(names):
        expected = (
            grid.metric(name)[i, j, 0]
            if name != "transfer_angle_deg"
            else (grid.transfer_angle_deg[i, j])
        )
        assert np.isfinite(expected)
        assert data.hover[j, i, k] == pytest.approx(expected, rel=1e-6)
    assert data.outside[j, i] == (not grid.within[i, j, 0])
    assert data.limit == case.limits.c3_max_km2_s2


def test_map_data_decimates_large_grids_to_grid_nodes(tallis):
    _, grid = tallis
    data = map_data(grid, "dla_deg", "0", max_points=100, contour_points=50)
    assert data.values.shape == (100, 100) and data.lines.values.shape == (50, 50)
    # Every drawn column is a grid node (to the second it is drawn at), and DLA is shown by
    # magnitude.
    nodes = display_ms(grid.departure_jd_tdb)
    assert np.isin(data.departure_ms, nodes).all()
    assert np.nanmin(data.values) >= 0 and data.metric_label == "|DLA|"


@pytest.mark.filterwarnings("ignore:ERFA function")  # astropy flags future UTC as "dubious"
def test_date_axis_agrees_with_astropy_utc():
    """Plot dates (ms since 1970 UTC) against astropy.time: TDB -> UTC, 1 ms."""
    from astropy.time import Time

    jd = np.array([2462502.5 + 69.184 / 86400, 2464000.25, 2451545.0])
    ours = jd_tdb_to_unix_ms(jd)
    theirs = Time(jd, format="jd", scale="tdb").utc.unix * 1000.0
    np.testing.assert_allclose(ours, theirs, atol=1.0)


@pytest.mark.filterwarnings("ignore:ERFA function")  # astropy flags future UTC as "dubious"
def test_cells_are_drawn_at_their_own_utc_second(tallis):
    """Grid dates on whole UTC days are drawn exactly on those midnights: a node a few ms before
    midnight (TDB steps; the periodic TDB-TT term, up to ~1.7 ms) once read as 23:59 of the day
    before in the hover. Checked against astropy.time (TDB -> UTC) to the second."""
    from astropy.time import Time

    from solver.ephemeris.timescales import utc_to_jd_tdb

    _, grid = tallis
    # The engine's own axes (counted in UTC), and an axis stepped evenly in TDB from a UTC
    # midnight (as refinement's and older grids' dates are), whose nodes drift by the periodic
    # TDB-TT term: both are drawn on their UTC midnights.
    tdb_even = float(utc_to_jd_tdb("2036-01-01")) + np.arange(366.0)
    assert np.any(jd_tdb_to_unix_ms(tdb_even) % 86_400_000.0 != 0.0)  # the drift is real
    for axis in (grid.departure_jd_tdb, grid.arrival_jd_tdb, tdb_even):
        drawn = display_ms(axis)
        assert np.all(drawn % 86_400_000.0 == 0.0)  # every node on a UTC midnight
        theirs = Time(axis, format="jd", scale="tdb").utc.unix * 1000.0
        np.testing.assert_allclose(drawn, theirs, atol=500.0)


def test_window_map_figure_draws_every_reading_aid(tallis):
    _, grid = tallis
    best = MapPoint(2.09e12, 2.1e12, 12.1, "best arc")
    chosen = MapPoint(2.08e12, 2.11e12, 15.0, "selected")
    data = map_data(grid, "c3_km2_s2", "0", best=best, selected=chosen)
    fig = figures.window_map_figure(data)
    assert isinstance(fig, go.Figure)
    names = [t.name for t in fig.data]
    for name, k in figures.MAP_TRACE.items():
        assert fig.data[k] is not None, name
    assert fig.data[figures.MAP_TRACE["values"]].type == "heatmap"
    assert fig.data[figures.MAP_TRACE["contours"]].contours.showlabels
    assert "Type I | Type II (180°)" in names and "constant TOF" in names
    assert fig.layout.xaxis.type == "date" and fig.layout.yaxis.type == "date"
    assert [c for _, c in fig.data[0].colorscale] == [c for _, c in theme.WINDOW_SCALE]
    assert "km²/s²" in fig.data[0].colorbar.title.text
    stars = [a for a in fig.layout.annotations if a.text == "★"]
    assert len(stars) == 1 and stars[0].x == best.departure_ms
    assert fig.layout.shapes[0].xanchor == chosen.departure_ms
    # Every hover number has its unit in the hover label.
    for _, label, unit, _ in data.hover_fields:
        assert f"{label} %{{customdata" in fig.data[0].hovertemplate
        assert unit in fig.data[0].hovertemplate


def test_type_boundary_leaves_out_the_wrap_at_360(kestrel):
    """Transfer angles near 0/360 are masked so the 180-degree contour has no false line."""
    _, grid = kestrel
    fig = figures.window_map_figure(map_data(grid, "c3_km2_s2", "best"))
    z = np.asarray(fig.data[figures.MAP_TRACE["type_boundary"]].z, dtype=float)
    finite = z[np.isfinite(z)]
    assert finite.size and np.abs(finite).max() <= 150.0 + 1e-3


def test_colour_scale_lightness_falls_monotonically():
    """Order is carried by lightness (readable with colour-vision deficiency and in grey):
    relative luminance per ITU-R BT.709 weights (common practice) must fall stop by stop."""

    def luminance(hex_colour):
        r, g, b = (int(hex_colour[k : k + 2], 16) / 255 for k in (1, 3, 5))
        return 0.2126 * r + 0.7152 * g + 0.0722 * b

    lum = [luminance(c) for _, c in theme.WINDOW_SCALE]
    assert all(a > b for a, b in itertools.pairwise(lum))
    assert lum[0] - lum[-1] > 0.7


def test_metric_patch_and_marker_patch_touch_only_what_changes(tallis):
    _, grid = tallis
    data = map_data(grid, "vinf_arrival_km_s", "0", best=MapPoint(1.0, 2.0, 3.0, "best arc"))
    patch = figures.map_metric_patch(Patch(), data)
    ops = patch.to_plotly_json()["operations"]
    locations = {tuple(op["location"]) for op in ops}
    assert ("data", 0, "z") in locations and ("data", 2, "contours") in locations
    assert ("layout", "annotations") in locations and ("layout", "shapes") in locations
    assert not any("customdata" in loc for loc in locations)  # hover numbers stay in the page
    z = next(op for op in ops if tuple(op["location"]) == ("data", 0, "z"))["params"]["value"]
    assert z["dtype"] == "f4" and z["shape"] == ", ".join(map(str, data.values.shape))
    decoded = np.frombuffer(base64.b64decode(z["bdata"]), dtype=np.float32)
    np.testing.assert_array_equal(decoded.reshape(data.values.shape), data.values)
    markers = figures.set_markers(Patch(), None, MapPoint(1.0, 2.0, 3.0, "x"), "km/s")
    marker_ops = markers.to_plotly_json()["operations"]
    assert {op["location"][0] for op in marker_ops} == {"layout"}


# ---------------------------------------------------------------------------------------------
# Arc view


def test_arc_view_joins_the_bodies_with_equal_axis_scales(tallis):
    case, grid = tallis
    i, j, _ = grid.best_cell("c3_km2_s2")
    dep, arr = grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j]
    arc = select_arc(solve_cell(case, dep, arr), 0, "single")
    scene = arc_scene(case, arc)
    # The transfer arc leaves Earth at departure and meets Tallis at arrival (ephemeris states,
    # rotated to the ecliptic the picture is drawn in), to 1 km.
    reg = case.registry()
    earth, _ = states("earth", dep, central="sun", frame=ECLIPTIC, registry=reg)
    tallis_r, _ = states("Tallis", arr, central="sun", frame=ECLIPTIC, registry=reg)
    np.testing.assert_allclose(scene.arc[0] * AU_KM, earth, atol=1.0)
    np.testing.assert_allclose(scene.arc[-1] * AU_KM, tallis_r, atol=1.0)
    np.testing.assert_allclose(scene.departure.at_departure * AU_KM, earth, atol=1.0)
    np.testing.assert_allclose(scene.target.at_arrival * AU_KM, tallis_r, atol=1.0)
    fig = figures.arc_view_figure(scene)
    sc = fig.layout.scene
    spans = [sc[a].range[1] - sc[a].range[0] for a in ("xaxis", "yaxis", "zaxis")]
    ratios = [sc.aspectratio.x, sc.aspectratio.y, sc.aspectratio.z]
    np.testing.assert_allclose(np.array(ratios) / ratios[0], np.array(spans) / spans[0])
    names = {t.name for t in fig.data}
    assert {"transfer arc", "Earth", "Tallis", "Sun", "ecliptic J2000 plane"} <= names


def test_planet_centred_view_draws_the_planet_and_its_equator(kestrel):
    case, grid = kestrel
    i, j, k = grid.best_cell("c3_km2_s2")
    arcs = solve_cell(case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j])
    arc = select_arc(arcs, int(grid.revolutions[k]), ["single", "low", "high"][grid.branch[k]])
    scene = arc_scene(case, arc)
    assert scene.unit == "10³ km" and scene.central_radius == pytest.approx(6.3781366)
    assert "equator" in scene.plane_label
    np.testing.assert_allclose(scene.arc[0], arc.r1_km / 1000.0, atol=1e-6)  # ICRF = equator
    fig = figures.arc_view_figure(scene)
    assert any(t.type == "surface" for t in fig.data)  # the Earth as a sphere at this scale


# ---------------------------------------------------------------------------------------------
# Family chart


def test_family_chart_marks_the_selected_arc_on_its_own_curve(kestrel):
    """Each arc of a multi-revolution cell lies on Lagrange's curve of its revolution count:
    τ(ε) from the equation equals the arc's own τ (Battin 1999 §4.5)."""
    case, grid = kestrel
    i, j, _ = grid.best_cell("c3_km2_s2")
    arcs = solve_cell(case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j])
    selected = select_arc(arcs, metric="c3_km2_s2")
    data = family_data(case, arcs, selected)
    assert data.selected is not None and data.selected.revolutions == selected.revolutions
    for p, arc in zip(data.cell_arcs, [a for a in arcs if a.ok], strict=True):
        before = tau_of_epsilon(p.epsilon, data.lam, arc.revolutions, False)
        after = tau_of_epsilon(p.epsilon, data.lam, arc.revolutions, True)
        assert min(abs(before - p.tau), abs(after - p.tau)) < 1e-6 * p.tau
    assert [m.epsilon for m in data.minimum_energy] == [-1.0] * (case.max_revolutions + 1)
    fig = figures.family_chart_figure(data)
    names = [t.name for t in fig.data]
    assert "selected arc" in names and "parabola (ε = 0)" in names
    assert {f"N = {n}" for n in range(case.max_revolutions + 1)} <= set(names)
    hover_names = " ".join(t.hovertemplate or "" for t in fig.data)
    way = (Family.ELLIPSE_LONG_BEFORE, Family.ELLIPSE_LONG_AFTER, Family.HYPERBOLA_LONG)
    if data.lam >= 0:
        way = (Family.ELLIPSE_SHORT_BEFORE, Family.ELLIPSE_SHORT_AFTER, Family.HYPERBOLA_SHORT)
    assert all(f.label in hover_names for f in way)  # the glossary's words on hover
    assert fig.layout.annotations[0].text.replace("<br>", " ") == data.selected.label


def test_details_carry_every_metric_with_units(tallis):
    case, grid = tallis
    i, j, _ = grid.best_cell("c3_km2_s2")
    arc = select_arc(solve_cell(case, grid.departure_jd_tdb[i], grid.arrival_jd_tdb[j]), 0)
    details = arc_details(case, arc, grid.provenance)
    assert {"Arc", "Departure", "Arrival", "Total", "Provenance"} <= {h for h, _ in details}
    rows = detail_rows(details)
    assert rows[("Departure", "C3")].unit == METRICS["c3_km2_s2"].unit
    assert float(rows[("Departure", "C3")].value) == pytest.approx(
        arc.metrics["c3_km2_s2"], abs=5e-4
    )
    assert rows[("Arc", "TOF")].value == f"{arc.tof_days:.2f}"
    assert rows[("Provenance", "case hash")].value == grid.provenance["case_hash"]
    assert rows[("Arc", "departure")].unit == "UTC"
    assert "185 km parking orbit" in rows[("Departure", "Δv counted as")].value
    assert "match the target's velocity" in rows[("Arrival", "Δv counted as")].value
    point = map_point(arc, "dla_deg", "best arc")
    assert point.value == pytest.approx(abs(arc.metrics["dla_deg"]))
    assert CaseBodies.of(case).central.name == "sun"


def test_hover_carries_the_entry_speed_when_the_case_asks_for_it():
    from app.samples import load
    from solver.window.grid import compute_window

    case = load("vesper_venus_orbiter")  # entry_altitude_km = 125
    grid = compute_window(case)
    data = map_data(grid, "c3_km2_s2", "0")
    names = [name for name, *_ in data.hover_fields]
    assert names[len(HOVER_FIELDS)] == "entry_speed_km_s"
    assert names[len(HOVER_FIELDS) + 1 :] == [f[0] for f in MASS_HOVER_FIELDS]
    assert data.hover.shape[-1] == len(HOVER_FIELDS) + 1 + len(MASS_HOVER_FIELDS)
    i, j = 60, 120
    k = len(HOVER_FIELDS)
    assert data.hover[j, i, k] == pytest.approx(grid.arcs["entry_speed_km_s"][i, j, 0], rel=1e-6)


def test_large_responses_are_compressed(tmp_path):
    """The server gzips what it sends to browsers that accept it (maps run to megabytes)."""
    from app.dashboard import create_app

    client = create_app(cache_dir=tmp_path, data_dir=tmp_path).server.test_client()
    plain = client.get("/_dash-layout")
    packed = client.get("/_dash-layout", headers={"Accept-Encoding": "gzip"})
    assert packed.headers.get("Content-Encoding") == "gzip"
    assert len(packed.data) < len(plain.data) / 3


def test_an_arc_the_grid_does_not_hold_is_never_drawn_from_another_slot(tallis):
    """A grid of single-revolution arcs has no "N = 2, high branch" slot: the map refuses to draw
    it (it once fell back to slot 0 and showed the N = 0 map under the N = 2 label)."""
    from app.dashboard.display_data import any_arc_shown, shown_slot
    from solver.errors import InputError

    _, grid = tallis
    assert shown_slot(grid, "0") == 0 and shown_slot(grid, "best") is None
    assert shown_slot(grid, "2H") == -1 and not any_arc_shown(grid, "2H")
    with pytest.raises(InputError, match="arcs = '2H'"):
        map_data(grid, "c3_km2_s2", "2H")


def test_a_window_of_hours_has_upright_one_line_ticks_and_names_its_day_once():
    """Windows of hours: labels short and upright (tilted long labels ran into the axis title
    and the legend on a 1280-pixel screen); a window inside one UTC day names the day in the
    title; windows of days keep plotly's own labels."""
    hour_ms = 3_600_000.0
    day0 = float(np.datetime64("2031-03-01T00:00", "ms").astype(np.int64))
    one_day, title = figures._date_ticks(day0 + hour_ms * np.arange(0.0, 6.5, 0.5))
    assert one_day == {"tickformat": "%H:%M", "tickangle": 0}
    assert title == ", 2031-03-01"
    two_days, title = figures._date_ticks(day0 + hour_ms * np.arange(0.0, 40.0))
    assert two_days["tickangle"] == 0 and "%d %b" in two_days["tickformat"]
    assert title == ""
    assert figures._date_ticks(day0 + 86_400_000.0 * np.arange(30.0)) == ({}, "")
