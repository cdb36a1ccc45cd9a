"""The dashboard's view state: URL round trips, tolerance of bad links, control differences."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from app.dashboard.view_state import (
    DEFAULT_CASE_ID,
    FIELDS,
    MAP_METRICS,
    ViewState,
    arc_choices,
    arcs_value,
    fit_arcs,
    from_query,
    iso_to_unix_days,
    parse_arcs,
    plot_x_to_unix_ms,
    to_query,
    unix_days_to_iso,
)
from solver.errors import InputError

ROOT = Path(__file__).resolve().parents[1]
TALLIS = ROOT / "sample_cases" / "tallis_rendezvous.toml"

dates = st.datetimes(min_value=dt.datetime(1900, 1, 1), max_value=dt.datetime(2199, 12, 31)).map(
    lambda d: d.replace(second=0, microsecond=0).strftime("%Y-%m-%dT%H:%M")
)
numbers = st.floats(min_value=0.0, max_value=1e4, allow_nan=False).map(lambda x: round(x, 6))


@st.composite
def views(draw):
    changes = {}
    if draw(st.booleans()):
        changes["window.departure_start"] = draw(dates)
        changes["window.departure_end"] = draw(dates)
    for f in FIELDS:
        if draw(st.integers(0, 3)) == 0:
            if f.kind == "text":
                changes[f.key] = draw(st.sampled_from(["earth", "Tallis", "capture", "Kestrel-B"]))
            elif f.kind == "int":
                changes[f.key] = draw(st.integers(0, 20))
            elif f.kind == "optional_float":
                changes[f.key] = draw(st.one_of(st.none(), numbers))
            else:
                changes[f.key] = draw(numbers)
    selected = draw(st.one_of(st.none(), st.tuples(dates, dates)))
    return ViewState(
        case=draw(st.sampled_from(["tallis_rendezvous", "upload-0123456789ab"])),
        changes=tuple(sorted(changes.items())),
        metric=draw(st.sampled_from(MAP_METRICS)),
        arcs=draw(st.sampled_from(["best", "0", "1L", "3H", "12L"])),
        selected=selected,
    )


@settings(max_examples=200, deadline=None)
@given(views())
def test_url_round_trip_keeps_every_part_of_the_view(view):
    back = from_query(to_query(view))
    assert back == view
    assert back.notes == ()
    assert ViewState.from_dict(view.to_dict()) == view


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=200))
def test_any_query_string_reads_as_some_valid_view(text):
    view = from_query("?" + text)
    assert view.metric in MAP_METRICS
    parse_arcs(view.arcs)  # a readable arcs choice
    assert view.case


@pytest.mark.parametrize(
    "query, note",
    [
        ("?case=../../etc/passwd", "is not a case name"),
        ("?metric=speed", "metric 'speed' is not offered"),
        ("?arcs=2X", "arcs '2X'"),
        ("?c3max=lots", "c3max=lots is not a valid value"),
        ("?revs=1.5", "revs=1.5 is not a valid value"),
        ("?dep=2031-01-01", "is not 'start~end'"),
        ("?sel=2031-01-01", "sel is not"),
        ("?c3max=inf", "c3max=inf"),
    ],
)
def test_bad_link_parts_are_named_and_dropped(query, note):
    view = from_query(query)
    assert any(note in n for n in view.notes), view.notes
    assert view.case in (DEFAULT_CASE_ID, "")  # falls back rather than failing


def test_removed_limit_travels_as_none():
    view = ViewState(changes=(("limits.c3_max_km2_s2", None),))
    assert "c3max=none" in to_query(view)
    assert from_query(to_query(view)).change_dict() == {"limits.c3_max_km2_s2": None}


def test_slider_days_are_posix_days_and_round_to_the_minute():
    # 2036-01-01T00:00Z is 24106 days after 1970-01-01 (datetime arithmetic, POSIX days).
    expected = (dt.datetime(2036, 1, 1) - dt.datetime(1970, 1, 1)).days
    assert iso_to_unix_days("2036-01-01") == expected
    assert iso_to_unix_days("2036-01-01T12:00:00Z") == expected + 0.5
    assert unix_days_to_iso(expected) == "2036-01-01"
    assert unix_days_to_iso(expected + 0.25 + 10 / 86400) == "2036-01-01T06:00"
    assert plot_x_to_unix_ms("2036-01-01 06:00") == (expected + 0.25) * 86_400_000
    assert plot_x_to_unix_ms(123.0) == 123.0


def test_arc_choices_cover_every_slot_and_round_trip():
    choices = [value for value, _ in arc_choices(3)]
    assert choices == ["best", "0", "1L", "1H", "2L", "2H", "3L", "3H"]
    for value in choices[1:]:
        revolutions, branch = parse_arcs(value)
        assert arcs_value(revolutions, branch) == value
    assert arc_choices(0) == [("0", "single revolution (N = 0)")]
    assert fit_arcs("2H", 1) == "best" and fit_arcs("best", 0) == "0" and fit_arcs("1L", 2) == "1L"


# ---------------------------------------------------------------------------------------------
# The stored view: anything a page sends back is checked


json_values = st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats() | st.text(max_size=30),
    lambda children: (
        st.lists(children, max_size=4) | st.dictionaries(st.text(max_size=10), children, max_size=4)
    ),
    max_leaves=12,
)


@settings(max_examples=300, deadline=None)
@given(
    st.one_of(
        json_values,
        st.fixed_dictionaries(
            {},
            optional={
                "case": json_values,
                "changes": st.lists(st.lists(json_values, max_size=3), max_size=4) | json_values,
                "metric": st.sampled_from(MAP_METRICS) | json_values,
                "arcs": st.sampled_from(["best", "0", "1L", "2H"]) | json_values,
                "selected": st.tuples(dates, dates).map(list) | json_values,
            },
        ),
    )
)
@example({"\n": None})  # found by the explore profile: a key with a newline
def test_any_stored_view_is_a_valid_view_or_one_line_naming_the_part(data):
    """Every stored-view value is checked: a page may send anything back (issue: malformed
    values answered HTTP 500). The answer is a view whose every part is well formed, or one
    refusal naming the part."""
    try:
        view = ViewState.from_dict(data)
    except InputError as exc:
        message = str(exc)
        assert message.startswith("stored view") and "\n" not in message
        assert len(message) < 300
        return
    assert view.metric in MAP_METRICS
    parse_arcs(view.arcs)
    assert from_query(to_query(view)) == view  # it travels in a link unchanged
