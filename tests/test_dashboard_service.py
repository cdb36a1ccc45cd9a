"""The window page's server side without a browser: cases and uploads, fair grid jobs, the
shortlist file, views from links and clicks, the app's callbacks over HTTP, and the serve
command."""

from __future__ import annotations

import base64
import json
import sqlite3
import threading
import time
import tracemalloc
from pathlib import Path

import pytest

from app.dashboard import create_app
from app.dashboard.case_catalogue import (
    MAX_UPLOAD_BYTES,
    CaseCatalogue,
    content_id,
    forget,
    my_case_ids,
    remember,
)
from app.dashboard.config import Settings
from app.dashboard.grid_jobs import GridJobs
from app.dashboard.pages.window_page import slider_marks, slider_props
from app.dashboard.shortlist import MAX_NOTE_CHARS, Shortlist
from app.dashboard.slowdown import Slowdown
from app.dashboard.view_state import ViewState, iso_to_unix_days
from app.dashboard.window_service import WindowService
from solver.errors import InputError
from solver.time_units import MS_PER_DAY
from solver.window.grid import Cancelled, compute_window, grid_axes

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_cases"


def data_url(text: str | bytes) -> str:
    raw = text.encode() if isinstance(text, str) else text
    return "data:application/octet-stream;base64," + base64.b64encode(raw).decode()


@pytest.fixture
def service(tmp_path):
    settings = Settings.resolve(tmp_path / "cache", tmp_path / "data", SAMPLES)
    s = WindowService(settings, slowdown=Slowdown())
    yield s
    s.shutdown()


def _client(tmp_path, slowdown: Slowdown | None = None):
    from app.bench.dashboard_bench import DashClient, _test_client_transport

    settings = Settings.resolve(tmp_path / "c", tmp_path / "d", SAMPLES)
    service = WindowService(settings, slowdown=slowdown or Slowdown())
    app = create_app(service=service)
    deps = app.server.test_client().get("/_dash-dependencies").get_json()
    return DashClient(_test_client_transport(app), deps), service, app


# ---------------------------------------------------------------------------------------------
# Configuration order


def test_settings_take_argument_then_environment_then_default(tmp_path, monkeypatch):
    monkeypatch.setenv("ARCWINDOW_DATA_DIR", str(tmp_path / "env"))
    assert Settings.resolve(data_dir=tmp_path / "arg").data_dir == tmp_path / "arg"
    assert Settings.resolve().data_dir == tmp_path / "env"
    monkeypatch.delenv("ARCWINDOW_DATA_DIR")
    assert Settings.resolve().data_dir.name == "arcwindow"
    assert Settings.resolve().cases_dir == SAMPLES


def test_slowdown_setting_is_read_and_checked():
    assert Slowdown.from_text("grid=3,refine=4") == Slowdown(3.0, 4.0)
    assert Slowdown.from_text("") == Slowdown()
    with pytest.raises(InputError, match="ARCWINDOW_TEST_SLOWDOWN"):
        Slowdown.from_text("grid=fast")


# ---------------------------------------------------------------------------------------------
# Cases and uploads: names, not paths


def test_catalogue_lists_every_sample_by_title(tmp_path):
    catalogue = CaseCatalogue(SAMPLES, tmp_path)
    options = catalogue.options()
    values = [o["value"] for o in options]
    one_leg = sorted(p.stem for p in SAMPLES.glob("*.toml"))
    sequences = sorted(p.stem for p in (SAMPLES / "sequences").glob("*.toml"))
    assert values == one_leg + sequences  # the sequence samples after the one-leg ones
    assert all(o["label"].endswith("(sequence)") for o in options[len(one_leg) :])
    assert all(catalogue.is_sequence(v) for v in sequences)
    assert not any(catalogue.is_sequence(v) for v in one_leg)
    assert catalogue.default_id() == "tallis_rendezvous"


@pytest.mark.parametrize(
    "case_id",
    [
        "../sample_cases/tallis_rendezvous",
        "/etc/passwd",
        str(SAMPLES / "tallis_rendezvous"),
        "upload-../../x",
        "upload-0123456789ab",  # well formed, but no such upload
        "tallis_rendezvous.toml",
        ["tallis_rendezvous"],
        None,
    ],
)
def test_a_case_reference_is_a_name_in_the_catalogue_never_a_path(tmp_path, case_id):
    """Issue: a case name sent back by the page once loaded any *.toml file on the server and
    echoed its first unknown key. Every reference is now looked up in the catalogue's own
    listing of its folders."""
    secret = tmp_path / "secret.toml"
    secret.write_text('[case]\napi_token = "do-not-show"\n')
    catalogue = CaseCatalogue(SAMPLES, tmp_path / "uploads")
    with pytest.raises(InputError, match="a sample case name or an uploaded case") as info:
        catalogue.load(case_id)
    assert "do-not-show" not in str(info.value)
    refused = str(tmp_path / "secret")
    with pytest.raises(InputError) as info:
        catalogue.load(refused)
    assert "do-not-show" not in str(info.value)


@pytest.mark.parametrize(
    "payload, expected",
    [
        ("data:;base64,@@@", "a TOML case file"),
        ("no comma at all", "one TOML case file"),
        (None, "one TOML case file"),
        (data_url(b""), "empty"),
        (data_url(b"\x00\x01\x02binary"), "binary"),
        (data_url(b"\xff\xfe\x00"), "binary|UTF-8"),
        (data_url("[case\ntitle ="), "valid TOML"),
        (data_url('[case]\ntitle = "x"\ncentral_body = "sun"\n'), "window"),
        (data_url("# padding\n" * 40000), "under 256 KiB"),
        (data_url("# padding\n" * 150_000), r"1\.4 MiB"),
    ],
)
def test_bad_uploads_are_refused_with_the_reason(tmp_path, payload, expected):
    catalogue = CaseCatalogue(SAMPLES, tmp_path)
    with pytest.raises(InputError, match=expected) as info:
        catalogue.add_upload("bad.toml", payload)
    assert "\n" not in str(info.value)
    assert catalogue.upload_ids() == []


def test_upload_is_stored_once_by_content_hash_and_checked_when_read(tmp_path):
    catalogue = CaseCatalogue(SAMPLES, tmp_path)
    text = (SAMPLES / "vesper_venus_orbiter.toml").read_text()
    first = catalogue.add_upload("mine.toml", data_url(text))
    assert first == catalogue.add_upload("copy.toml", data_url(text))
    assert first == content_id(text.encode()) and catalogue.upload_ids() == [first]
    other = CaseCatalogue(SAMPLES, tmp_path)  # another server process on the same data folder
    assert other.load(first).title == "Vesper Venus orbiter, 2031 opportunity"
    assert not list(tmp_path.glob(".*.tmp"))  # no temporary file left behind
    # A damaged file is refused and reported, never trusted; uploading it again repairs it.
    stored = tmp_path / f"{first}.toml"
    stored.write_text(text.replace("2031", "2032", 1))
    fresh = CaseCatalogue(SAMPLES, tmp_path)
    with pytest.raises(InputError, match="no longer matches its content hash"):
        fresh.load(first)
    assert fresh.add_upload("again.toml", data_url(text)) == first
    assert CaseCatalogue(SAMPLES, tmp_path).load(first).title.startswith("Vesper")


def test_an_upload_is_stored_whole_or_not_at_all(tmp_path, monkeypatch):
    """Uploads go through the project's atomic writer (solver/files/atomic.py): a disk that
    fails before the rename leaves no case file and no temporary file, and the stored case
    another upload made before is untouched."""
    import app.dashboard.case_catalogue as case_catalogue
    import solver.files.atomic as atomic

    written = []

    def spy(path, **kwargs):
        written.append(Path(path).name)
        return atomic.atomic_output(path, **kwargs)

    monkeypatch.setattr(case_catalogue, "atomic_output", spy)
    catalogue = CaseCatalogue(SAMPLES, tmp_path)
    kept = catalogue.add_upload(
        "kept.toml", data_url((SAMPLES / "tallis_rendezvous.toml").read_text())
    )
    before = (tmp_path / f"{kept}.toml").read_bytes()
    assert written == [f"{kept}.toml"]  # the one writer every file of the project goes through

    def full_disk(fd):
        raise OSError(28, "No space left on device")

    text = (SAMPLES / "vesper_venus_orbiter.toml").read_text()
    with monkeypatch.context() as disk, pytest.raises(OSError, match="No space left"):
        disk.setattr(atomic.os, "fsync", full_disk)
        catalogue.add_upload("mine.toml", data_url(text))
    assert catalogue.upload_ids() == [kept]
    assert (tmp_path / f"{kept}.toml").read_bytes() == before
    assert not list(tmp_path.glob(".*.tmp"))


def test_uploads_are_listed_per_viewer_not_for_everyone(tmp_path):
    catalogue = CaseCatalogue(SAMPLES, tmp_path)
    text = (SAMPLES / "vesper_venus_orbiter.toml").read_text()
    mine = catalogue.add_upload("mine.toml", data_url(text))
    samples = {o["value"] for o in catalogue.options()}
    assert mine not in samples  # another viewer's picker does not list it
    my_list = remember([], mine)
    assert mine in {o["value"] for o in catalogue.options(my_list)}
    assert forget(my_list, mine) == []
    assert my_case_ids(["../x", 3, mine, mine, "tallis_rendezvous"]) == [mine]


def test_effective_case_applies_changes_and_names_refused_settings(service):
    view = ViewState(changes=(("limits.c3_max_km2_s2", 20.0),))
    assert service.case(view).limits.c3_max_km2_s2 == 20.0
    with pytest.raises(InputError, match=r"limits\.c3_max_km2_s2"):
        service.case(ViewState(changes=(("limits.c3_max_km2_s2", -5.0),)))
    with pytest.raises(InputError, match="cell-arcs"):
        service.case(ViewState(changes=(("window.departure_step_days", 0.001),)))


def test_a_huge_link_is_refused_before_anything_is_allocated(service):
    """Issue: the size check built both date axes first (3.2 GB for one link). A one-minute
    step over the whole ephemeris span is refused by arithmetic alone."""
    view = ViewState(
        changes=(
            ("window.arrival_end", "2200-01-01"),
            ("window.arrival_step_days", 1.0 / 1440.0),
            ("window.departure_start", "1800-01-01"),
            ("window.departure_step_days", 1.0 / 1440.0),
        )
    )
    tracemalloc.start()
    try:
        with pytest.raises(InputError, match="cell-arcs"):
            service.case(view)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < 20 * 1024**2


def test_element_only_case_in_year_one_gets_a_message(tmp_path):
    """Issue: a case whose bodies are all given by elements skips the ephemeris date check;
    viewed in year 0001 it answered HTTP 500. The dashboard holds such cases to its own range."""
    text = (SAMPLES / "kestrel_relay_leo.toml").read_text()
    text = text.replace(
        'central_body = "earth"\ndeparture_body', 'central_body = "P0"\ndeparture_body'
    )
    text = text.replace("[[bodies]]", ELEMENT_PLANET + "\n[[bodies]]", 1)
    text = text.replace('central_body = "earth"\nframe', 'central_body = "P0"\nframe')
    for a, b in (('start = "2031-03-01', 'start = "0001-03-01'),):  # the windows, not epochs
        text = text.replace(a, b)
    catalogue = CaseCatalogue(SAMPLES, tmp_path)
    # Refused by the case parser itself: element bodies have a date range of their own
    # (solver/ephemeris/bodies.py), the one rule the dashboard reads too.
    with pytest.raises(InputError, match=r"window\.departure_start = '0001-03-01T00:00:00'.*range"):
        catalogue.add_upload("old.toml", data_url(text))


def _element_only_case(year: int) -> str:
    """The relay sample about an invented element-defined planet P0, in another year."""
    text = (SAMPLES / "kestrel_relay_leo.toml").read_text()
    text = text.replace(
        'central_body = "earth"\ndeparture_body', 'central_body = "P0"\ndeparture_body'
    )
    text = text.replace("[[bodies]]", ELEMENT_PLANET + "\n[[bodies]]", 1)
    text = text.replace('central_body = "earth"\nframe', 'central_body = "P0"\nframe')
    return text.replace("2031-", f"{year:04d}-")


@pytest.mark.parametrize("year", [1500, 2900])
def test_element_only_cases_take_the_engines_date_range_on_the_dashboard(tmp_path, year):
    """The dashboard once held element-only cases to 1800-2200 while the engine accepts
    1000-3000 for element bodies: one rule now (solver/ephemeris/bodies.py), and such a case
    is shown like any other."""
    client, service, _ = _client(tmp_path)
    case_id = service.catalogue.add_upload("far.toml", data_url(_element_only_case(year)))
    client.open_page(f"?case={case_id}")
    assert client.settle(60.0)
    assert client.values["graph-window-map.figure"]["data"][0]["type"] == "heatmap"
    assert str(year) in json.dumps(client.values["div-details-arc.children"])
    assert set(client.statuses) == {200}
    service.shutdown()


def test_a_date_outside_the_element_range_is_refused_on_its_control(tmp_path):
    """A slider moved outside what the engine accepts: one line on the date control naming the
    field, the value and the accepted range; the view keeps its last good dates."""
    client, service, _ = _client(tmp_path)
    case_id = service.catalogue.add_upload("far.toml", data_url(_element_only_case(2900)))
    client.open_page(f"?case={case_id}")
    client.settle(60.0)
    before = client.values["store-view-query.data"]
    end = iso_to_unix_days("3000-06-01")
    client.values["slider-arrival-range.value"] = [end - 10.0, end]
    assert client.sync("slider-arrival-range.value") == 200
    error = client.values["store-control-errors.data"]["arr"]
    assert "window.arrival_start" in error and "3000-05-22" in error
    assert "1000-01-01 to 3000-01-01" in error
    assert client.values["store-view-query.data"] == before
    service.shutdown()


ELEMENT_PLANET = """[[bodies]]
name = "P0"
central_body = "sun"
epoch_utc = "2031-01-01"
semi_major_axis_au = 2.0
eccentricity = 0.0
inclination_deg = 0.0
raan_deg = 0.0
arg_periapsis_deg = 0.0
mean_anomaly_deg = 0.0
gm_km3_s2 = 398600.4
radius_km = 6378.0
"""


# ---------------------------------------------------------------------------------------------
# Views from links and clicks


def test_link_with_refused_parts_falls_back_and_says_why(service):
    view, _, notes = service.view_from_url("?case=nowhere&metric=dv_total_km_s")
    assert view.case == "tallis_rendezvous" and view.metric == "dv_total_km_s"
    assert any("no case 'nowhere'" in n for n in notes)
    view, _, notes = service.view_from_url("?case=tallis_rendezvous&c3max=-3&sel=2036-13-01~x")
    assert view.changes == () and view.selected is None
    assert any("limits.c3_max_km2_s2" in n for n in notes)


def test_cases_leaving_a_satellite_open_on_total_dv(service):
    """C3 and DLA describe a launch; between satellites the map opens on total Δv instead,
    unless the link or the analyst asks for C3."""
    view, _, _ = service.view_from_url("?case=kestrel_relay_leo")
    assert view.metric == "dv_total_km_s"
    view, _, _ = service.view_from_url("?case=kestrel_relay_leo&metric=c3_km2_s2")
    assert view.metric == "c3_km2_s2"
    view, _ = service.view_for_case("kestrel_relay_leo", "dla_deg")
    assert view.metric == "dv_total_km_s"
    view, _ = service.view_for_case("kestrel_relay_leo", "tof_days")
    assert view.metric == "tof_days"
    view, _, _ = service.view_from_url("?case=vesper_venus_orbiter")
    assert view.metric == "c3_km2_s2"
    view, _ = service.view_for_case("vesper_venus_orbiter", "c3_km2_s2")
    assert view.metric == "c3_km2_s2"


def test_click_selects_the_nearest_grid_node_exactly(service):
    view, case, _ = service.view_from_url("?case=tallis_rendezvous")
    dep, arr = grid_axes(case)
    picked = service.select_point(view, case, "2036-03-01 07:10", 2103249000000.0)
    assert picked.selected[0] == "2036-03-01T00:00:00Z"
    sel = service.selection(picked, case, None)
    assert sel is not None and not sel.is_best
    assert sel.arc.departure_jd_tdb == dep[152]  # the grid node itself, not its UTC text
    assert sel.arc.arrival_jd_tdb in arr


def test_best_arc_is_the_grid_node_then_the_refined_arc_for_every_caller(service):
    view, case, _ = service.view_from_url("?case=tallis_rendezvous&arcs=0")
    grid = compute_window(case)
    node = service.best_arc(case, grid, "c3_km2_s2", "0", refined=False)
    i, j, k = grid.best_cell("c3_km2_s2")
    assert node.departure_jd_tdb == grid.departure_jd_tdb[i]
    assert node.arrival_jd_tdb == grid.arrival_jd_tdb[j]
    assert service.best_state(view, case, grid) in ("refining", "refined")
    assert service.best.wait(grid, "c3_km2_s2", "0", 60.0)
    assert service.best_state(view, case, grid) == "refined"
    best = service.best_arc(case, grid, "c3_km2_s2", "0", refined=True)
    assert best.within
    assert best.metrics["c3_km2_s2"] <= grid.arcs["c3_km2_s2"][i, j, k] + 1e-9
    # The grid node stays what a page that shows the node asks for; the map's star and the
    # details ask with the same flag, so they agree.
    assert service.best_arc(case, grid, "c3_km2_s2", "0", refined=False) == node
    sel = service.selection(view, case, grid, "refined")
    assert sel.is_best and sel.refined and sel.arc.departure_jd_tdb == best.departure_jd_tdb
    assert service.best_state(view, case, None) == "lost"


def test_slider_domain_reaches_beyond_the_case_and_is_aligned_to_its_step():
    base = [iso_to_unix_days("2035-10-01"), iso_to_unix_days("2036-06-30")]
    props = slider_props(base, [base[0] - 500.0, base[1]], 1.0)
    assert props["min"] <= base[0] - 500.0 and props["max"] > base[1]
    assert (base[0] - props["min"]) % 1.0 == pytest.approx(0.0, abs=1e-9)
    assert len(slider_marks(props["min"], props["max"])) == 4


# ---------------------------------------------------------------------------------------------
# Fair grid jobs


def _slow_compute(delay_s, calls=None):
    def compute(case, *, cache=None, progress=None):
        if calls is not None:
            calls.append(case.title)
        for k in range(10):
            time.sleep(delay_s)  # a stand-in engine that takes a while per chunk
            if progress:
                progress(k + 1, 10)
        return compute_window(case)

    return compute


def _wait_for(condition, timeout_s=20.0):
    deadline = time.monotonic() + timeout_s
    while not condition():
        assert time.monotonic() < deadline, "condition not met in time"
        time.sleep(0.01)


def test_job_is_shared_reported_and_kept_in_memory(service):
    jobs = GridJobs(None, compute=_slow_compute(0.02), slowdown=Slowdown())
    case = service.case(ViewState())
    ticket = jobs.request(case, "a")
    assert ticket.phase in ("queued", "running")
    assert jobs.request(case, "b").key == ticket.key and jobs.waiters(ticket.key) == 2
    assert jobs.wait(ticket.key, 10.0) is not None
    assert jobs.ticket(ticket.key, "a").phase == "ready"
    assert jobs.request(case, "c").phase == "ready"
    jobs.shutdown()


def test_a_viewer_cancels_only_its_own_wait(service):
    """Issue: job keys were shared, so any viewer could cancel a job others waited for."""
    jobs = GridJobs(None, compute=_slow_compute(0.05), slowdown=Slowdown())
    case = service.case(ViewState())
    key = jobs.request(case, "a").key
    jobs.request(case, "b")
    assert not jobs.cancel(key, "mallory")  # not waiting for it: refused
    assert jobs.cancel(key, "a")  # a stops waiting; b still waits, so the job runs on
    assert jobs.wait(key, 10.0) is not None
    assert jobs.ticket(key, "b").phase == "ready"
    jobs.shutdown()


def test_a_job_stops_when_its_last_viewer_leaves_or_stops_polling(service):
    now = [0.0]
    jobs = GridJobs(None, compute=_slow_compute(0.05), slowdown=Slowdown(), clock=lambda: now[0])
    small = service.case(ViewState())
    other = service.case(ViewState(case="vesper_venus_orbiter"))
    key = jobs.request(small, "a").key
    jobs.request(other, "a")  # a moves on: nobody waits for the first grid any more
    _wait_for(lambda: jobs.ticket(key, "a").phase == "cancelled")
    second = jobs.request(small, "b").key  # asked again: a fresh job
    now[0] += 60.0  # b closed its tab: its wait lapses
    assert jobs.ticket(second, "c").phase in ("cancelled", "queued", "running")
    _wait_for(lambda: jobs.ticket(second, "c").phase == "cancelled")
    jobs.shutdown()


def test_a_large_grid_does_not_hold_up_a_small_one(service):
    """Issue: one worker; a grid just under the cap held it for 30 s while another viewer's
    small grid waited. Large grids have a lane of their own."""
    release = threading.Event()

    def compute(case, *, cache=None, progress=None):
        if case.departure_step_days < 1.0:
            release.wait(20.0)  # the large grid: held until the test lets it go
            raise Cancelled()
        return compute_window(case)

    jobs = GridJobs(None, compute=compute, slowdown=Slowdown(), large_cell_arcs=200_000)
    large = service.case(ViewState(changes=(("window.departure_step_days", 0.5),)))
    small = service.case(ViewState(case="vesper_venus_orbiter"))
    jobs.request(large, "big-viewer")
    key = jobs.request(small, "small-viewer").key
    try:
        assert jobs.wait(key, 15.0) is not None  # solved while the large lane is busy
    finally:
        release.set()
        jobs.shutdown()


def test_limits_per_address_and_for_the_whole_queue(service):
    gate = threading.Event()

    def compute(case, *, cache=None, progress=None):
        gate.wait(10.0)
        raise Cancelled()

    jobs = GridJobs(None, compute=compute, slowdown=Slowdown(), max_per_address=2, max_queued=3)
    cases = [
        service.case(ViewState(changes=(("limits.c3_max_km2_s2", float(c)),)))
        for c in (20, 21, 22, 23)
    ]
    jobs.request(cases[0], "v1", "10.0.0.1")
    jobs.request(cases[1], "v2", "10.0.0.1")
    with pytest.raises(InputError, match="per address"):
        jobs.request(cases[2], "v3", "10.0.0.1")
    jobs.request(cases[0], "v4", "10.0.0.1")  # joining a job that exists is always allowed
    jobs.request(cases[2], "w1", "10.0.0.2")
    with pytest.raises(InputError, match="at most 3 at once"):
        jobs.request(cases[3], "w2", "10.0.0.2")
    gate.set()
    jobs.shutdown()


def test_failed_job_reports_its_error():
    def broken(case, *, cache=None, progress=None):
        raise RuntimeError("disk on fire")

    jobs = GridJobs(None, compute=broken, slowdown=Slowdown())
    case = CaseCatalogue(SAMPLES, Path("/nonexistent")).load("vesper_venus_orbiter")
    key = jobs.request(case, "a").key
    jobs.wait(key, 10.0)
    ticket = jobs.ticket(key, "a")
    assert ticket.phase == "failed" and "disk on fire" in ticket.message
    jobs.shutdown()


def test_a_grid_dropped_before_it_was_drawn_is_reported_lost_and_solved_again(service):
    jobs = GridJobs(None, slowdown=Slowdown(), max_grids=1)
    tallis = service.case(ViewState())
    vesper = service.case(ViewState(case="vesper_venus_orbiter"))
    key = jobs.request(tallis, "a").key
    assert jobs.wait(key, 30.0) is not None
    jobs.wait(jobs.request(vesper, "b").key, 30.0)  # pushes tallis out of memory
    assert jobs.ticket(key, "a").phase == "lost"
    assert jobs.ticket("no-such-key", "a").phase == "lost"
    assert jobs.request(tallis, "a").phase in ("queued", "running", "ready")
    jobs.shutdown()


def test_memory_lru_is_bounded():
    jobs = GridJobs(None, max_grids=2, slowdown=Slowdown())
    grid = compute_window(CaseCatalogue(SAMPLES, Path("/x")).load("vesper_venus_orbiter"))
    for k in range(4):
        jobs.memory_put(f"k{k}", grid)
    assert jobs.memory_get("k0") is None and jobs.memory_get("k3") is grid
    jobs.shutdown()


def test_slowdown_delays_jobs_and_a_cancel_is_still_heard(service):
    jobs = GridJobs(None, slowdown=Slowdown(grid_s=5.0))
    case = service.case(ViewState(case="vesper_venus_orbiter"))
    key = jobs.request(case, "a").key
    time.sleep(0.2)
    assert jobs.ticket(key, "a").phase == "running"
    assert jobs.cancel(key, "a")
    _wait_for(lambda: jobs.ticket(key, "a").phase == "cancelled", 3.0)
    jobs.shutdown()


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
    assert shortlist.problems() == []  # every entry whole (tests/test_shortlist_store.py)


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


# ---------------------------------------------------------------------------------------------
# The app over HTTP (Flask test client) and the serve command


def test_app_serves_both_pages_and_their_layouts(tmp_path):
    app = create_app(cache_dir=tmp_path / "c", data_dir=tmp_path / "d")
    client = app.server.test_client()
    for path in ("/", "/survey", "/survey/"):
        assert client.get(path).status_code == 200, path
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
    assert {"store-viewer-id", "store-my-cases", "_pages_content"} <= ids
    from app.dashboard.pages import survey_page, window_page

    for page, required in (
        (
            window_page,
            (
                "graph-window-map",
                "graph-arc-view",
                "graph-family-chart",
                "slider-departure-range",
                "slider-arrival-range",
                "div-details-arc",
                "div-caution-banner",
                "button-grid-cancel",
                "button-copy-link",
                "input-c3max",
                "dropdown-from",
            ),
        ),
        (survey_page, ("dropdown-survey-file", "div-survey-table")),
    ):
        ids = set()
        walk(json.loads(json.dumps(page.page_layout(), default=lambda c: c.to_plotly_json())))
        for required_id in required:
            assert required_id in ids, required_id
        for component_id in ids:  # widget-subject-parameter, hyphenated
            assert component_id.count("-") >= 1 and component_id == component_id.lower()
    app.server.config["ARCWINDOW_SERVICE"].shutdown()


def test_serve_command_has_the_sharing_flags():
    from app.cli import build_parser

    args = build_parser().parse_args(["serve", "--cache-dir", "c", "--data-dir", "d"])
    assert args.host == "127.0.0.1" and args.port == 8050
    assert args.cache_dir == "c" and args.data_dir == "d"


def test_callbacks_over_http_open_click_and_change_metric(tmp_path):
    """The page's requests, built from the app's own callback list (as `arcwindow bench` does):
    a page load, a click on a cell and a metric change all answer 200, the click selects that
    cell and the metric change patches the map instead of resending it."""
    client, service, _ = _client(tmp_path)
    assert client.open_page("?case=vesper_venus_orbiter") == [200]
    assert client.settle(60.0)
    assert client.values["graph-window-map.figure"]["data"][0]["type"] == "heatmap"
    assert set(client.statuses) == {200}
    x = iso_to_unix_days("2031-06-01") * MS_PER_DAY
    y = iso_to_unix_days("2031-11-01") * MS_PER_DAY
    assert client.click(x, y) == [200]
    assert "sel=2031-06-01T00:00:00Z~2031-11-01T00:00:00Z" in client.values["store-view-query.data"]
    details = json.dumps(client.values["div-details-arc.children"])
    assert "2031-06-01 00:00:00" in details and "km/s" in details
    client.values["dropdown-metric.value"] = "dv_total_km_s"
    status, _ = client.call("store-view-state.data", ["dropdown-metric.value"])
    assert status == 200 and "metric=dv_total_km_s" in client.values["store-view-query.data"]
    status, reply = client.call("graph-window-map.figure", ["store-grid-status.data"])
    figure = reply["response"]["graph-window-map"]["figure"]
    assert status == 200 and "__dash_patch_update" in figure  # a patch, not the whole map
    service.shutdown()


def test_a_slow_grid_is_polled_to_the_map_and_the_refined_best_arc(tmp_path):
    """The page's loop on a slowed server: progress first, then the map of the view, then the
    refined best arc in both the map's star and the details."""
    client, service, _ = _client(tmp_path, Slowdown(grid_s=1.0, refine_s=1.0))
    client.open_page("?case=vesper_venus_orbiter")
    status = client.values["store-grid-status.data"]
    assert status["phase"] == "solving"
    assert "Solving" in client.values["text-grid-progress.children"]
    assert client.settle(60.0)
    status = client.values["store-grid-status.data"]
    shown = client.values["store-map-shown.data"]
    assert status["phase"] == "ready" and status["best"] == "refined"
    assert shown["kind"] == "full" and shown["best"] == "refined"
    assert shown["view"] == status["view"] == client.values["store-view-query.data"]
    assert "refined off the grid" in json.dumps(client.values["div-details-arc.children"])
    from app.bench.dashboard_bench import stale_reason

    assert stale_reason(client, service.catalogue) == ""
    service.shutdown()


@pytest.mark.parametrize(
    "stored",
    [
        "not a view",
        {"case": "../../etc/passwd"},
        {"case": "tallis_rendezvous", "metric": "speed"},
        {"case": "tallis_rendezvous", "arcs": "9X"},
        {"case": "tallis_rendezvous", "changes": [["limits.c3_max_km2_s2", "lots"]]},
        {"case": "tallis_rendezvous", "changes": [["case.api_token", "x"]]},
        {"case": "tallis_rendezvous", "changes": [["limits.c3_max_km2_s2", 1e400]]},
        {"case": "tallis_rendezvous", "changes": "everything"},
        {"case": "tallis_rendezvous", "selected": ["x", "y"]},
        {"case": "tallis_rendezvous", "selected": "2031-01-01"},
        {"case": ["tallis_rendezvous"]},
        {"case": "tallis_rendezvous", "changes": [["transfer.max_revolutions", 10**30]]},
    ],
)
def test_every_stored_view_value_is_checked_never_a_server_error(tmp_path, stored):
    """Issue: eight malformed stored-view values answered HTTP 500. Each callback that reads
    the stored view now answers 200 (the view is read again from the link, or nothing drawn)."""
    client, service, _ = _client(tmp_path)
    client.open_page("?case=vesper_venus_orbiter")
    client.values["store-view-state.data"] = stored
    client.values["dropdown-metric.value"] = "tof_days"
    assert client.call("store-view-state.data", ["dropdown-metric.value"])[0] == 200
    message = json.dumps(client.values.get("div-message-view.children"))
    assert "stored view was refused" in message
    client.values["store-view-state.data"] = stored
    for first, changed in (
        ("graph-window-map.figure", "store-grid-status.data"),
        ("graph-arc-view.figure", "store-grid-status.data"),
        ("store-grid-polled.data", "interval-grid-poll.n_intervals"),
        ("download-file.data", "button-download-arc-oem.n_clicks"),
        ("div-shortlist-table.children", "button-shortlist-add.n_clicks"),
    ):
        client.values["button-download-arc-oem.n_clicks"] = 1
        client.values["button-shortlist-add.n_clicks"] = 1
        assert client.call(first, [changed])[0] == 200, first
    service.shutdown()


def test_an_element_only_case_in_year_one_answers_with_a_message(tmp_path):
    """Issue: viewing a case of element-defined bodies in year 0001 answered HTTP 500."""
    client, service, _ = _client(tmp_path)
    client.open_page("?case=kestrel_relay_leo")
    client.settle(60.0)
    start = iso_to_unix_days("0001-03-01")
    client.values["slider-departure-range.value"] = [start, start + 0.25]
    assert client.sync("slider-departure-range.value") == 200
    assert set(client.statuses) == {200}
    errors = client.values["store-control-errors.data"]
    assert "0001-03-01" in errors["dep"] and "1799" in errors["dep"]
    assert len(errors["dep"]) <= 300
    service.shutdown()


DOWNLOADS = [  # button, file-name ending, how the file starts (the grid: next test)
    ("button-download-arc-oem", "_arc.oem", "CCSDS_OEM_VERS"),
    ("button-download-arc-json", "_arc.json", "{"),
    ("button-download-family-html", "_family_chart.html", "<!doctype html>"),
    ("button-download-map-html", "_window_map.html", "<!doctype html>"),
]


def test_downloads_are_named_after_the_view_and_carry_provenance_and_caution(tmp_path):
    client, service, _ = _client(tmp_path)
    client.open_page("?case=vesper_venus_orbiter&sel=2031-06-01T00:00:00Z~2031-11-01T00:00:00Z")
    client.settle(60.0)
    for button, ending, start in DOWNLOADS:
        client.values[f"{button}.n_clicks"] = 1
        status, reply = client.call("download-file.data", [f"{button}.n_clicks"])
        data = reply["response"]["download-file"]["data"]
        assert status == 200, button
        name = data["filename"]
        assert name.startswith("Vesper_Venus_orbiter_2031_opportunity_c3_N0_2031-06-01_2031-11-01")
        assert name.endswith(ending), name
        content = data["content"]
        if data.get("base64"):
            content = base64.b64decode(content).decode("utf-8")
        assert content.lstrip().startswith(start), button
        if ending.endswith(".html"):
            assert "high-fidelity tools" in content  # the caution travels with it
            assert '"showSendToCloud": false' in content  # nothing offered to a cloud service
        client.values[f"{button}.n_clicks"] = 0
    service.shutdown()


def test_grid_csv_has_the_command_lines_provenance_header(tmp_path):
    """The dashboard's CSV (streamed from a file by its own route, app/dashboard/downloads.py)
    is written by the same function as `arcwindow grid --out`, and named after the view."""
    from app.cli import main

    client, service, app = _client(tmp_path)
    view = "?case=vesper_venus_orbiter&sel=2031-06-01T00:00:00Z~2031-11-01T00:00:00Z"
    client.open_page(view)
    client.settle(60.0)
    answer = app.server.test_client().get("/download/grid.csv" + view)
    assert answer.status_code == 200
    assert (
        "Vesper_Venus_orbiter_2031_opportunity_c3_N0_2031-06-01_2031-11-01_grid.csv"
        in (answer.headers["Content-Disposition"])
    )
    ours = answer.get_data(as_text=True)
    service.shutdown()
    out = tmp_path / "cli.csv"
    assert main(["grid", str(SAMPLES / "vesper_venus_orbiter.toml"), "--out", str(out)]) == 0
    cli = out.read_text()

    def header(text):
        return [ln.split(":", 1)[0] for ln in text.splitlines() if ln.startswith("# ")]

    assert header(ours) == header(cli) and "# caution" in header(ours)
    assert ours.splitlines()[len(header(ours))] == cli.splitlines()[len(header(cli))]


def test_shortlist_entry_is_recomputed_from_the_view_and_its_link_reopens_it(service):
    view, _, _ = service.view_from_url(
        "?case=vesper_venus_orbiter&sel=2031-06-01T00:00:00Z~2031-11-01T00:00:00Z"
    )
    entry = service.keep(view, " check the DLA ", "RM")
    assert (entry.departure_utc, entry.arrival_utc) == view.selected
    assert entry.metrics["tof_days"] == pytest.approx(153.0)
    assert entry.note == "check the DLA" and entry.author == "RM"
    again, _, notes = service.view_from_url(entry.view)
    assert again.selected == view.selected and not notes
    with pytest.raises(InputError):
        service.keep(ViewState(case="no_such_case"), "", "")


def test_inputs_that_change_together_are_all_heard(tmp_path):
    """Regression: when a poll tick and a click arrive in the same round, Dash names only the
    first as triggered; the click must still be kept."""
    client, service, _ = _client(tmp_path)
    client.open_page("?case=vesper_venus_orbiter")
    client.settle(60.0)
    client.values["button-shortlist-add.n_clicks"] = 1
    client.values["input-shortlist-author.value"] = "RM"
    status, _ = client.call(
        "div-shortlist-table.children",
        ["interval-shortlist-poll.n_intervals", "button-shortlist-add.n_clicks"],
    )
    assert status == 200 and len(service.shortlist.entries()) == 1
    service.shutdown()


def test_a_shortlist_that_cannot_save_says_so_on_the_page(tmp_path, monkeypatch):
    """A full or locked store once answered the "Add" click with a server error and a line in
    the server's log only; the page now says why in one line, and keeps the note for a retry."""
    import app.dashboard.shortlist as shortlist_module

    client, service, _ = _client(tmp_path)
    client.open_page("?case=vesper_venus_orbiter")
    client.settle(60.0)

    def full(*args, **kwargs):
        raise sqlite3.OperationalError("database or disk is full")

    monkeypatch.setattr(shortlist_module.Shortlist, "_ensure", full)
    client.values["button-shortlist-add.n_clicks"] = 1
    client.values["input-shortlist-note.value"] = "check the DLA"
    status, reply = client.call("div-shortlist-table.children", ["button-shortlist-add.n_clicks"])
    assert status == 200
    message = json.dumps(reply["response"]["div-message-shortlist"]["children"])
    assert "Shortlist: not kept" in message and "full" in message
    assert "input-shortlist-note" not in reply["response"]  # the note stays for another try
    monkeypatch.undo()
    assert service.shortlist.entries() == []
    service.shutdown()


def test_upload_over_http_joins_the_viewers_list_and_is_shown(tmp_path):
    client, service, _ = _client(tmp_path)
    client.open_page("")
    text = (SAMPLES / "vesper_venus_orbiter.toml").read_text().replace("Vesper Venus", "Copy")
    client.values["store-upload.data"] = {"contents": data_url(text), "filename": "c.toml"}
    status, reply = client.call("div-message-upload.children", ["store-upload.data"])
    assert status == 200
    case_id = reply["response"]["dropdown-case"]["value"]
    assert client.values["store-my-cases.data"] == [case_id]
    assert any(o["value"] == case_id for o in client.values["dropdown-case.options"])
    big = data_url("#" * (MAX_UPLOAD_BYTES + 10))
    client.values["store-upload.data"] = {"contents": big, "filename": "big.toml"}
    status, reply = client.call("div-message-upload.children", ["store-upload.data"])
    assert status == 200 and "under 256 KiB" in json.dumps(reply)
    # the viewer removes it from its own list; the picker goes back to the default case
    client.values["dropdown-case.value"] = case_id
    client.values["button-case-remove.n_clicks"] = 1
    status, reply = client.call("dropdown-case.options", ["button-case-remove.n_clicks"])
    assert status == 200 and client.values["store-my-cases.data"] == []
    assert reply["response"]["dropdown-case"]["value"] == "tallis_rendezvous"
    assert all(o["value"] != case_id for o in client.values["dropdown-case.options"])
    service.shutdown()


def test_a_satellite_case_hides_the_launch_only_controls_and_says_why(tmp_path):
    """docs/dashboard.md: controls that do not fit the case (C3 and DLA for a transfer that
    leaves a satellite) are not offered. A launch from a planet about the Sun shows them; a
    transfer between satellites of Earth hides them with one line saying why."""
    from app.dashboard.controls import LAUNCH_FIELD_KEYS, launch_fields

    assert LAUNCH_FIELD_KEYS == ("limits.c3_max_km2_s2", "limits.dla_max_deg", "spacecraft.vehicle")
    styles, hint = launch_fields(True, "Sun")
    assert hint == "" and all(style == {} for style in styles.values())
    styles, hint = launch_fields(False, "Earth")
    assert set(styles) == set(LAUNCH_FIELD_KEYS)
    assert all(style == {"display": "none"} for style in styles.values())
    assert "C3 max" in hint and "|DLA| max" in hint and "launch vehicle" in hint
    assert "Earth" in hint

    client, service, _ = _client(tmp_path)
    client.open_page("?case=kestrel_relay_leo")
    assert client.values["field-c3max.style"] == {"display": "none"}
    assert client.values["field-dlamax.style"] == {"display": "none"}
    assert client.values["field-vehicle.style"] == {"display": "none"}
    assert "Earth" in client.values["text-launch-hint.children"]
    client.open_page("?case=tallis_rendezvous")
    assert client.values["field-c3max.style"] == {} == client.values["field-dlamax.style"]
    assert client.values["text-launch-hint.children"] == ""
    service.shutdown()
