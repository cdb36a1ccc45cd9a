"""The survey page's data: the shelf of results files and opening a target's window."""

from __future__ import annotations

import pytest
from small_survey import write_small_survey

from app.dashboard.case_catalogue import CaseCatalogue
from app.dashboard.surveys import SurveyShelf
from app.dashboard.view_state import from_query
from app.samples import SAMPLE_DIR
from solver.ephemeris.timescales import utc_to_jd_tdb
from solver.errors import InputError
from solver.survey.results import load_results


@pytest.fixture(scope="module")
def shelf(tmp_path_factory):
    folder = tmp_path_factory.mktemp("shelf")
    surveys = folder / "surveys"
    surveys.mkdir()
    write_small_survey(surveys / "small.parquet", targets=5)
    return SurveyShelf(surveys, CaseCatalogue(SAMPLE_DIR, folder / "uploads"))


def test_shelf_lists_and_reads_results(shelf):
    assert shelf.names() == ["small"]
    table = shelf.table("small")
    assert table.targets == 5 and table.years == (2031, 2031)
    assert list(table.frame["rank"]) == sorted(table.frame["rank"])
    assert "5 targets" in table.summary


def test_open_target_makes_a_window_case_around_the_best_arc(shelf):
    table = shelf.table("small")
    row = table.frame[table.frame["status"] == "within_limits"].iloc[0]
    query = shelf.open_target("small", row["target"])
    view = from_query(query)
    case = shelf.catalogue.load(view.case)
    assert case.target_body == row["target"]
    assert case.departure_start_jd_tdb <= row["departure_jd_tdb"] <= case.departure_end_jd_tdb
    assert case.arrival_start_jd_tdb <= row["arrival_jd_tdb"] <= case.arrival_end_jd_tdb
    dep = float(utc_to_jd_tdb(view.selected[0]))
    assert abs(dep - row["departure_jd_tdb"]) <= 1.0 / 1440.0  # the selection, to the minute
    # the same target opens the same stored case
    assert shelf.open_target("small", row["target"]) == query
    assert len(load_results(shelf.path("small"))) == 5


@pytest.mark.parametrize("name", ["../etc/passwd", "missing", ""])
def test_bad_results_names_are_refused(shelf, name):
    with pytest.raises(InputError, match="results"):
        shelf.table(name)


def test_unknown_target_is_refused(shelf):
    with pytest.raises(InputError, match="target"):
        shelf.open_target("small", "nobody")


def test_a_damaged_results_file_is_reported_on_the_page_not_a_server_error(tmp_path):
    from app.bench.dashboard_bench import DashClient, _test_client_transport
    from app.dashboard import create_app

    surveys = tmp_path / "surveys"
    surveys.mkdir()
    (surveys / "broken.parquet").write_bytes(b"PAR1 this is not a parquet file")
    app = create_app(cache_dir=tmp_path / "c", data_dir=tmp_path / "d", surveys_dir=surveys)
    deps = app.server.test_client().get("/_dash-dependencies").get_json()
    client = DashClient(_test_client_transport(app), deps)
    client.values["store-survey-query.data"] = "?results=broken"
    status, _ = client.call("dropdown-survey-file.options", ["store-survey-query.data"])
    assert status == 200
    assert "could not be read" in client.values["div-survey-message.children"]
    client.values["store-page-query.data"] = "?survey=broken&target=x"
    assert client.sync("store-page-query.data") == 200
    assert "could not be read" in str(client.values["div-message-view.children"])
    app.server.config["ARCWINDOW_SERVICE"].shutdown()
