"""The dashboard's model without a browser: cases and uploads, grid jobs, the shortlist file,
views from links and clicks, the app's callbacks over HTTP, and the serve command."""

from __future__ import annotations

import base64
import json
import threading
import time
from pathlib import Path

import pytest

from app.dashboard import create_app
from app.dashboard.callbacks import slider_marks, slider_props
from app.dashboard.cases import CaseCatalogue
from app.dashboard.config import Settings
from app.dashboard.jobs import GridStore
from app.dashboard.model import DashboardModel
from app.dashboard.shortlist import MAX_NOTE_CHARS, Shortlist
from app.dashboard.state import ViewState, iso_to_unix_days
from solver.errors import InputError
from solver.window.grid import Cancelled, compute_window, grid_axes

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_cases"


def data_url(text: str | bytes) -> str:
    raw = text.encode() if isinstance(text, str) else text
    return "data:application/octet-stream;base64," + base64.b64encode(raw).decode()


@pytest.fixture
def model(tmp_path):
    settings = Settings.resolve(tmp_path / "cache", tmp_path / "data", SAMPLES)
    m = DashboardModel(settings)
    yield m
    m.shutdown()


# ---------------------------------------------------------------------------------------------
# Configuration order


def test_settings_take_argument_then_environment_then_default(tmp_path, monkeypatch):
    monkeypatch.setenv("ARCWINDOW_DATA_DIR", str(tmp_path / "env"))
    assert Settings.resolve(data_dir=tmp_path / "arg").data_dir == tmp_path / "arg"
    assert Settings.resolve().data_dir == tmp_path / "env"
    monkeypatch.delenv("ARCWINDOW_DATA_DIR")
    assert Settings.resolve().data_dir.name == "arcwindow"
    assert Settings.resolve().cases_dir == SAMPLES


# ---------------------------------------------------------------------------------------------
# Cases and uploads


def test_catalogue_lists_every_sample_by_title(tmp_path):
    catalogue = CaseCatalogue(SAMPLES, tmp_path)
    values = [o["value"] for o in catalogue.options()]
    assert values == sorted(p.stem for p in SAMPLES.glob("*.toml"))
    assert catalogue.default_id() == "tallis_rendezvous"


@pytest.mark.parametrize(
    "payload, expected",
    [
        ("data:;base64,@@@", "a TOML case file"),
        (data_url(b"\xff\xfe\x00"), "UTF-8"),
        (data_url("[case\ntitle ="), "valid TOML"),
        (data_url('[case]\ntitle = "x"\ncentral_body = "sun"\n'), "window"),
        (data_url("# padding\n" * 40000), "under 256 KiB"),
    ],
)
def test_bad_uploads_are_refused_with_the_reason(tmp_path, payload, expected):
    catalogue = CaseCatalogue(SAMPLES, tmp_path)
    with pytest.raises(InputError, match=expected):
        catalogue.add_upload("bad.toml", payload)
    assert catalogue.upload_ids() == []


def test_upload_is_stored_once_by_content_and_offered_to_everyone(tmp_path):
    catalogue = CaseCatalogue(SAMPLES, tmp_path)
    text = (SAMPLES / "vesper_venus_orbiter.toml").read_text()
    first = catalogue.add_upload("mine.toml", data_url(text))
    assert first == catalogue.add_upload("copy.toml", data_url(text))
    assert first.startswith("upload-") and catalogue.upload_ids() == [first]
    other = CaseCatalogue(SAMPLES, tmp_path)  # another server process on the same data folder
    assert other.load(first).title == "Vesper Venus orbiter, 2031 opportunity"
    assert any(o["value"] == first for o in other.options())


def test_effective_case_applies_changes_and_names_refused_settings(model):
    view = ViewState(changes=(("limits.c3_max_km2_s2", 20.0),))
    assert model.case(view).limits.c3_max_km2_s2 == 20.0
    with pytest.raises(InputError, match=r"limits\.c3_max_km2_s2"):
        model.case(ViewState(changes=(("limits.c3_max_km2_s2", -5.0),)))
    with pytest.raises(InputError, match="cell-arcs"):
        model.case(ViewState(changes=(("window.departure_step_days", 0.001),)))


# ---------------------------------------------------------------------------------------------
# Views from links and clicks


def test_link_with_refused_parts_falls_back_and_says_why(model):
    view, _, notes = model.view_from_url("?case=nowhere&metric=dv_total_km_s")
    assert view.case == "tallis_rendezvous" and view.metric == "dv_total_km_s"
    assert any("no case 'nowhere'" in n for n in notes)
    view, _, notes = model.view_from_url("?case=tallis_rendezvous&c3max=-3&sel=2036-13-01~x")
    assert view.changes == () and view.selected is None
    assert any("limits.c3_max_km2_s2" in n for n in notes)


def test_cases_leaving_a_satellite_open_on_total_dv(model):
    """C3 and DLA describe a launch; between satellites the map opens on total Δv instead,
    unless the link or the analyst asks for C3."""
    view, _, _ = model.view_from_url("?case=kestrel_relay_leo")
    assert view.metric == "dv_total_km_s"
    view, _, _ = model.view_from_url("?case=kestrel_relay_leo&metric=c3_km2_s2")
    assert view.metric == "c3_km2_s2"
    view, _ = model.view_for_case("kestrel_relay_leo", "dla_deg")
    assert view.metric == "dv_total_km_s"
    view, _ = model.view_for_case("kestrel_relay_leo", "tof_days")
    assert view.metric == "tof_days"
    view, _, _ = model.view_from_url("?case=vesper_venus_orbiter")
    assert view.metric == "c3_km2_s2"
    view, _ = model.view_for_case("vesper_venus_orbiter", "c3_km2_s2")
    assert view.metric == "c3_km2_s2"


def test_click_selects_the_nearest_grid_node_exactly(model):
    view, case, _ = model.view_from_url("?case=tallis_rendezvous")
    dep, arr = grid_axes(case)
    picked = model.select_point(view, case, "2036-03-01 07:10", 2103249000000.0)
    assert picked.selected[0] == "2036-03-01T00:00:00Z"
    sel = model.selection(picked, case, None)
    assert sel is not None and not sel.is_best
    assert sel.arc.departure_jd_tdb == dep[152]  # the grid node itself, not its UTC text
    assert sel.arc.arrival_jd_tdb in arr


def test_best_arc_is_the_grid_node_at_once_and_the_refined_arc_later(model):
    view, case, _ = model.view_from_url("?case=tallis_rendezvous")
    grid = compute_window(case)
    node, refined = model.best_arc(case, grid, "c3_km2_s2", "0")
    i, j, k = grid.best_cell("c3_km2_s2")
    if not refined:  # the node: exactly the grid's best cell
        assert node.departure_jd_tdb == grid.departure_jd_tdb[i]
        assert node.arrival_jd_tdb == grid.arrival_jd_tdb[j]
    model.best.wait(case, grid, "c3_km2_s2", "0", 60.0)
    best, refined = model.best_arc(case, grid, "c3_km2_s2", "0")
    assert refined and best.within
    assert best.metrics["c3_km2_s2"] <= grid.arcs["c3_km2_s2"][i, j, k] + 1e-9
    sel = model.selection(view, case, grid)
    assert sel.is_best and sel.refined and sel.arc.departure_jd_tdb == best.departure_jd_tdb


def test_slider_domain_reaches_beyond_the_case_and_is_aligned_to_its_step():
    base = [iso_to_unix_days("2035-10-01"), iso_to_unix_days("2036-06-30")]
    props = slider_props(base, [base[0] - 500.0, base[1]], 1.0)
    assert props["min"] <= base[0] - 500.0 and props["max"] > base[1]
    assert (base[0] - props["min"]) % 1.0 == pytest.approx(0.0, abs=1e-9)
    assert len(slider_marks(props["min"], props["max"])) == 4


# ---------------------------------------------------------------------------------------------
# Grid jobs


def _slow_compute(delay_s):
    def compute(case, *, cache=None, progress=None):
        for k in range(10):
            time.sleep(delay_s)  # a stand-in engine that takes a while per chunk
            if progress:
                progress(k + 1, 10)
        return compute_window(case)

    return compute


def test_job_is_shared_reported_and_kept_in_memory(model):
    store = GridStore(None, compute=_slow_compute(0.02))
    case = model.case(ViewState())
    grid, job = store.request(case)
    assert grid is None and job.state == "running"
    assert store.request(case)[1] is job  # a second viewer joins the same job
    assert store.wait(job, 10.0) is not None and job.state == "done"
    assert job.status()["fraction"] == 1.0
    grid, again = store.request(case)
    assert grid is not None and again is None
    store.shutdown()


def test_cancel_stops_a_running_job(model):
    store = GridStore(None, compute=_slow_compute(0.05))
    case = model.case(ViewState())
    _, job = store.request(case)
    assert store.cancel(job.key)
    store.wait(job, 10.0)
    assert job.state == "cancelled" and store.memory_get(job.key) is None
    store.shutdown()


def test_failed_job_reports_its_error():
    def broken(case, *, cache=None, progress=None):
        raise RuntimeError("disk on fire")

    store = GridStore(None, compute=broken)
    case = CaseCatalogue(SAMPLES, Path("/nonexistent")).load("vesper_venus_orbiter")
    _, job = store.request(case)
    store.wait(job, 10.0)
    assert job.state == "failed" and "disk on fire" in job.message
    store.shutdown()


def test_memory_lru_is_bounded():
    store = GridStore(None, max_grids=2)
    cases = [CaseCatalogue(SAMPLES, Path("/x")).load(n) for n in ("vesper_venus_orbiter",)]
    grid = compute_window(cases[0])
    for k in range(4):
        store.memory_put(f"k{k}", grid)
    assert store.memory_get("k0") is None and store.memory_get("k3") is grid
    store.shutdown()


def test_cancelled_exception_is_the_engine_one():
    assert issubclass(Cancelled, Exception)


# ---------------------------------------------------------------------------------------------
# Shortlist


ENTRY = {
    "case_id": "tallis_rendezvous",
    "case_title": "Tallis rendezvous",
    "case_hash": "abc",
    "departure_utc": "2036-03-01T00:00:00Z",
    "arrival_utc": "2036-09-01T00:00:00Z",
    "revolutions": 0,
    "branch": "single",
    "metrics": {"c3_km2_s2": 13.2},
    "view": "?case=tallis_rendezvous",
}


def test_concurrent_writers_lose_no_entry(tmp_path):
    shortlist = Shortlist(tmp_path / "shortlist.json")
    other = Shortlist(tmp_path / "shortlist.json")  # a second handle, as from another process

    def add(k):
        (shortlist if k % 2 else other).add(**ENTRY, note=f"n{k}", author="t")

    threads = [threading.Thread(target=add, args=(k,)) for k in range(40)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    notes = sorted(e.note for e in shortlist.entries())
    assert notes == sorted(f"n{k}" for k in range(40))
    json.loads((tmp_path / "shortlist.json").read_text())  # a whole file, never a half one
    assert not list(tmp_path.glob(".shortlist-*.tmp"))


def test_entries_are_cleaned_removed_and_versioned(tmp_path):
    shortlist = Shortlist(tmp_path / "s.json")
    assert shortlist.entries() == [] and shortlist.version() == "empty"
    entry = shortlist.add(**ENTRY, note="  two\x00 lines\nok ", author="AB")
    assert entry.note == "two lines\nok"
    version = shortlist.version()
    with pytest.raises(InputError, match="note"):
        shortlist.add(**ENTRY, note="x" * (MAX_NOTE_CHARS + 1), author="")
    assert shortlist.remove(entry.id) and not shortlist.remove(entry.id)
    assert shortlist.version() != version and shortlist.entries() == []
    (tmp_path / "s.json").write_text("{not json")
    assert shortlist.entries() == []  # a damaged file reads as empty, never an error


# ---------------------------------------------------------------------------------------------
# The app over HTTP (Flask test client) and the serve command


def test_app_serves_page_layout_and_a_view_callback(tmp_path):
    app = create_app(cache_dir=tmp_path / "c", data_dir=tmp_path / "d")
    client = app.server.test_client()
    assert client.get("/").status_code == 200
    layout = client.get("/_dash-layout").get_json()
    ids = set()

    def walk(node):
        if isinstance(node, dict):
            props = node.get("props", {})
            if isinstance(props.get("id"), str):
                ids.add(props["id"])
            for value in props.values():
                walk(value)
        elif isinstance(node, list):
            for item in node:
                walk(item)

    walk(layout)
    for required in (
        "graph-window-map",
        "graph-arc-view",
        "graph-family-chart",
        "slider-departure-range",
        "slider-arrival-range",
        "div-details-arc",
        "div-caution-banner",
        "button-grid-cancel",
    ):
        assert required in ids
    for component_id in ids:  # widget-subject-parameter, hyphenated
        assert component_id.count("-") >= 1 and component_id == component_id.lower()
    app.server.config["ARCWINDOW_MODEL"].shutdown()


def test_serve_command_has_the_sharing_flags():
    from app.cli import build_parser

    args = build_parser().parse_args(["serve", "--cache-dir", "c", "--data-dir", "d"])
    assert args.host == "127.0.0.1" and args.port == 8050
    assert args.cache_dir == "c" and args.data_dir == "d"


def test_callbacks_over_http_open_click_and_change_metric(tmp_path):
    """The page's requests, built from the app's own callback list (as `arcwindow bench` does):
    a page load, a click on a cell and a metric change all answer 200, the click selects that
    cell and the metric change patches the map instead of resending it."""
    from app.bench.dashboard_bench import DashClient, _test_client_transport

    settings = Settings.resolve(tmp_path / "c", tmp_path / "d", SAMPLES)
    model = DashboardModel(settings)
    app = create_app(model=model)
    deps = app.server.test_client().get("/_dash-dependencies").get_json()
    client = DashClient(_test_client_transport(app), deps)
    assert client.open_page("?case=vesper_venus_orbiter") == [200, 200, 200]
    assert client.values["graph-window-map.figure"]["data"][0]["type"] == "heatmap"
    x = iso_to_unix_days("2031-06-01") * 86_400_000.0
    y = iso_to_unix_days("2031-11-01") * 86_400_000.0
    assert client.click(x, y) == [200, 200, 200]
    assert (
        "sel=2031-06-01T00:00:00Z~2031-11-01T00:00:00Z" in client.values["location-page-url.search"]
    )
    details = json.dumps(client.values["div-details-arc.children"])
    assert "2031-06-01 00:00:00" in details and "km/s" in details
    client.values["dropdown-metric.value"] = "dv_total_km_s"
    status, reply = client.call("location-page-url.search", ["dropdown-metric.value"])
    assert status == 200 and "metric=dv_total_km_s" in client.values["location-page-url.search"]
    status, reply = client.call("graph-window-map.figure", ["store-view-state.data"])
    figure = reply["response"]["graph-window-map"]["figure"]
    assert status == 200 and "__dash_patch_update" in figure  # a patch, not the whole map
    model.shutdown()


DOWNLOADS = [  # button, file-name ending, how the file starts
    ("button-download-grid-csv", "_grid.csv", "departure_utc"),
    ("button-download-arc-oem", "_arc.oem", "CCSDS_OEM_VERS"),
    ("button-download-arc-json", "_arc.json", "{"),
    ("button-download-family-html", "_family.html", "<!doctype html>"),
]


def test_downloads_of_grid_arc_and_figure(tmp_path):
    from app.bench.dashboard_bench import DashClient, _test_client_transport

    model = DashboardModel(Settings.resolve(tmp_path / "c", tmp_path / "d", SAMPLES))
    app = create_app(model=model)
    deps = app.server.test_client().get("/_dash-dependencies").get_json()
    client = DashClient(_test_client_transport(app), deps)
    client.open_page("?case=vesper_venus_orbiter&sel=2031-06-01T00:00:00Z~2031-11-01T00:00:00Z")
    for button, ending, start in DOWNLOADS:
        client.values[f"{button}.n_clicks"] = 1
        status, reply = client.call("download-file.data", [f"{button}.n_clicks"])
        data = reply["response"]["download-file"]["data"]
        assert status == 200, button
        assert data["filename"].startswith("Vesper_Venus_orbiter") and data["filename"].endswith(
            ending
        )
        assert data["content"].lstrip().startswith(start), button
        if ending.endswith(".html"):
            assert "high-fidelity tools" in data["content"]  # the caution travels with it
        client.values[f"{button}.n_clicks"] = 0
    model.shutdown()


def test_shortlist_entry_is_recomputed_from_the_view_and_its_link_reopens_it(model):
    view, _, _ = model.view_from_url(
        "?case=vesper_venus_orbiter&sel=2031-06-01T00:00:00Z~2031-11-01T00:00:00Z"
    )
    entry = model.keep(view, " check the DLA ", "RM")
    assert (entry.departure_utc, entry.arrival_utc) == view.selected
    assert entry.metrics["tof_days"] == pytest.approx(153.0)
    assert entry.note == "check the DLA" and entry.author == "RM"
    again, _, notes = model.view_from_url(entry.view)
    assert again.selected == view.selected and not notes
    with pytest.raises(InputError):
        model.keep(ViewState(case="no_such_case"), "", "")


def test_inputs_that_change_together_are_all_heard(tmp_path):
    """Regression: when a new view and a slider's drag echo (or a poll tick and a click) arrive in
    the same round, Dash names only the first as triggered; the map must still be drawn and the
    click still kept (a freshly loaded page once stayed on "Loading..." this way)."""
    from app.bench.dashboard_bench import DashClient, _test_client_transport

    model = DashboardModel(Settings.resolve(tmp_path / "c", tmp_path / "d", SAMPLES))
    app = create_app(model=model)
    deps = app.server.test_client().get("/_dash-dependencies").get_json()
    client = DashClient(_test_client_transport(app), deps)
    client.values["location-page-url.search"] = "?case=vesper_venus_orbiter"
    assert client.sync("location-page-url.search") == 200
    status, reply = client.call(
        "graph-window-map.figure",
        ["slider-departure-range.drag_value", "store-view-state.data"],
    )
    assert status == 200
    figure = reply["response"]["graph-window-map"]["figure"]
    assert figure["data"][0]["type"] == "heatmap"

    client.draw_selection()
    client.values["button-shortlist-add.n_clicks"] = 1
    client.values["input-shortlist-author.value"] = "RM"
    status, reply = client.call(
        "div-shortlist-table.children",
        ["interval-shortlist-poll.n_intervals", "button-shortlist-add.n_clicks"],
    )
    assert status == 200 and len(model.shortlist.entries()) == 1
    model.shutdown()
