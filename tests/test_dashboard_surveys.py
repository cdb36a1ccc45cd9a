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
