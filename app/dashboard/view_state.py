"""View state: what one browser tab shows, and its round trip through the page URL.

A view is a case (a sample file or an uploaded one), the changes the analyst made to it with
the controls, the metric on the window map, the arcs shown (the best arc of each cell or one
revolution count and branch) and the selected cell. Everything else (the grid, the figures,
the details) follows from it, so a link that carries the view shows a teammate the same thing.

Only differences from the case file travel in the URL, which keeps links short and lets a link
survive small edits to a sample case. The query looks like::

    ?case=tallis_rendezvous&metric=c3_km2_s2&arcs=best
     &dep=2035-11-01~2036-05-31&c3max=25&sel=2036-01-10T00:00Z~2036-08-02T00:00Z

The view also travels back from the page in a ``dcc.Store``; :meth:`ViewState.from_dict` checks
every value of it (a page can send anything) and refuses a bad one with one line naming it.

Everything here is plain data and string handling, testable without Dash.
"""

from __future__ import annotations

import datetime as dt
import math
import re
from dataclasses import dataclass, field, replace
from typing import Any
from urllib.parse import parse_qsl, quote

from solver.errors import InputError
from solver.mechanics.lambert import BRANCH_HIGH, BRANCH_LOW, BRANCH_NAMES, BRANCH_SINGLE
from solver.time_units import MINUTES_PER_DAY, MS_PER_DAY, SECONDS_PER_DAY
from solver.window.case import Case, to_toml_dict
from solver.window.metrics import METRICS
from solver.window.settings import SETTINGS, Setting

DEFAULT_CASE_ID = "tallis_rendezvous"
DEFAULT_METRIC = "c3_km2_s2"
MAP_METRICS = (
    "c3_km2_s2",
    "vinf_arrival_km_s",
    "dv_total_km_s",
    "dla_deg",
    "tof_days",
    "injected_mass_kg",
    "delivered_mass_kg",
    "mass_margin_kg",
)
"""Metrics a window map can show (the details panel shows all). Each case is offered those
that describe its arcs (``solver.window.outputs.case_outputs``): no C3 or DLA for a transfer
that starts with a burn, no kilograms without a spacecraft mass, no margin without a required
mass."""

RANGE_SEPARATOR = "~"  # unreserved in URLs, so links stay readable
_UNIX_EPOCH = dt.datetime(1970, 1, 1, tzinfo=dt.UTC)
CASE_ID_RE = re.compile(r"[A-Za-z0-9_-]{1,80}")
"""What a case id looks like: a sample file's stem or ``upload-<hash>``; nothing else is looked
up, and an id is only ever a key of the server's catalogue, never part of a path."""
_ARCS_RE = re.compile(r"best|0|[1-9][0-9]?[LH]")
_DATE_RE = re.compile(
    r"[0-9]{4}-[0-9]{2}-[0-9]{2}([T ][0-9]{2}:[0-9]{2}(:[0-9]{2}(\.[0-9]+)?)?)?Z?"
)
_MAX_TEXT = 80


@dataclass(frozen=True)
class Field:
    """One case setting a control can change: URL name, dotted case key, value kind."""

    url: str
    key: str
    kind: str  # "text", "float", "int", "optional_float"


def _field_kind(setting: Setting) -> str:
    if setting.kind == "integer":
        return "int"
    if setting.kind == "number":
        return "float" if setting.default is not None else "optional_float"
    return "text"


# Scalar settings a link can carry, from the one table of case settings; the two date windows
# are handled as ranges (see RANGES).
FIELDS: tuple[Field, ...] = tuple(
    Field(s.url, s.key, _field_kind(s)) for s in SETTINGS if s.url is not None
)
FIELD_BY_KEY = {f.key: f for f in FIELDS}
FIELD_BY_URL = {f.url: f for f in FIELDS}
RANGES = {
    "dep": ("window.departure_start", "window.departure_end"),
    "arr": ("window.arrival_start", "window.arrival_end"),
}
NONE_TEXT = "none"  # a limit removed with the controls travels as c3max=none


@dataclass(frozen=True)
class ViewState:
    """What one tab shows.

    Attributes
    ----------
    case : str
        Case id: a sample file's stem or ``upload-<hash>``.
    changes : tuple of (dotted key, value)
        Changes to the case, sorted by key; a value of None removes an optional setting.
    metric : str
        ``METRICS`` column shown on the window map.
    arcs : str
        ``"best"`` (the best arc of each cell), ``"0"`` (single revolution) or ``"<N>L"`` /
        ``"<N>H"`` (the N-revolution low or high branch).
    selected : (str, str) or None
        Departure and arrival UTC of the selected cell; None selects the best arc.
    """

    case: str = DEFAULT_CASE_ID
    changes: tuple[tuple[str, Any], ...] = ()
    metric: str = DEFAULT_METRIC
    arcs: str = "best"
    selected: tuple[str, str] | None = None
    notes: tuple[str, ...] = field(default=(), compare=False)

    def change_dict(self) -> dict[str, Any]:
        return dict(self.changes)

    def with_changes(self, changes: dict[str, Any]) -> ViewState:
        return replace(self, changes=tuple(sorted(changes.items())))

    def case_part(self) -> tuple:
        """The part of the view that decides the grid (case and its changes)."""
        return (self.case, self.changes)

    def to_dict(self) -> dict[str, Any]:
        """JSON-able form for a dcc.Store."""
        return {
            "case": self.case,
            "changes": [[k, v] for k, v in self.changes],
            "metric": self.metric,
            "arcs": self.arcs,
            "selected": list(self.selected) if self.selected else None,
        }

    @classmethod
    def from_dict(cls, data: Any) -> ViewState:
        """The view a page's store holds, every value checked.

        Raises
        ------
        InputError
            A value that is not what the page itself writes (one line naming the part, the value
            cut short, and what is accepted).
        """
        if data is None:
            return cls()
        if not isinstance(data, dict):
            raise InputError("stored view", _short(data), "a view object")
        unknown = set(data) - {"case", "changes", "metric", "arcs", "selected"}
        if unknown:
            raise InputError(
                "stored view",
                _short(sorted(map(str, unknown))[0]),
                "case, changes, metric, arcs, sel",
            )
        case = data.get("case") or DEFAULT_CASE_ID
        if not isinstance(case, str) or not CASE_ID_RE.fullmatch(case):
            raise InputError("stored view case", _short(case), "a case name")
        metric = data.get("metric") or DEFAULT_METRIC
        if metric not in MAP_METRICS:
            raise InputError(
                "stored view metric", _short(metric), "one of " + ", ".join(MAP_METRICS)
            )
        arcs = data.get("arcs") or "best"
        if not isinstance(arcs, str) or not _ARCS_RE.fullmatch(arcs):
            raise InputError("stored view arcs", _short(arcs), "best, 0, or N followed by L or H")
        changes = data.get("changes") or []
        if not isinstance(changes, list) or len(changes) > len(FIELDS) + 4:
            raise InputError("stored view changes", _short(changes), "a list of [key, value]")
        checked: dict[str, Any] = {}
        for item in changes:
            if not isinstance(item, list | tuple) or len(item) != 2:
                raise InputError("stored view changes", _short(item), "a [key, value] pair")
            key, value = item
            checked[str(key)[:_MAX_TEXT]] = _stored_change(key, value)
        selected = data.get("selected")
        if selected is not None:
            if (
                not isinstance(selected, list | tuple)
                or len(selected) != 2
                or not all(isinstance(d, str) and _DATE_RE.fullmatch(d) for d in selected)
            ):
                raise InputError("stored view sel", _short(selected), "two ISO 8601 UTC dates")
            selected = (selected[0], selected[1])
        return cls(
            case=case,
            changes=tuple(sorted(checked.items())),
            metric=metric,
            arcs=arcs,
            selected=selected,
        )


def _short(value: Any, n: int = 40) -> str:
    printable = isinstance(value, str) and value.isprintable()
    text = value if printable else repr(value)  # a newline or control character stays visible
    return text if len(text) <= n else text[: n - 3] + "..."


_RANGE_KEYS = {
    "window.departure_start",
    "window.departure_end",
    "window.arrival_start",
    "window.arrival_end",
}


def _stored_change(key: Any, value: Any) -> Any:
    """One stored change checked for its kind (bounds are the case parser's job)."""
    if not isinstance(key, str):
        raise InputError("stored view changes", _short(key), "a setting's dotted key")
    if key in _RANGE_KEYS:
        if isinstance(value, str) and _DATE_RE.fullmatch(value):
            return value
        raise InputError(f"stored view {key}", _short(value), "an ISO 8601 UTC date")
    f = FIELD_BY_KEY.get(key) if isinstance(key, str) else None
    if f is None:
        raise InputError("stored view changes", _short(key), "a setting the controls change")
    if f.kind == "text":
        if isinstance(value, str) and 0 < len(value) <= _MAX_TEXT:
            return value
        raise InputError(
            f"stored view {key}", _short(value), f"a name of 1 to {_MAX_TEXT} characters"
        )
    if value is None and f.kind == "optional_float":
        return None
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise InputError(f"stored view {key}", _short(value), "a number")
    if f.kind == "int":
        if isinstance(value, float) and not value.is_integer():
            raise InputError(f"stored view {key}", _short(value), "an integer")
        if abs(value) > 10**6:
            raise InputError(f"stored view {key}", _short(value), "an integer below a million")
        return int(value)
    if not math.isfinite(float(value)):
        raise InputError(f"stored view {key}", _short(value), "a finite number")
    return float(value)


# ---------------------------------------------------------------------------------------------
# URL query


def _format_value(value: Any) -> str:
    if value is None:
        return NONE_TEXT
    if isinstance(value, float):
        return f"{value:.10g}"
    return str(value)


def to_query(view: ViewState) -> str:
    """The URL query (with its leading ``?``) that carries ``view``."""
    changes = view.change_dict()
    parts: list[tuple[str, str]] = [("case", view.case)]
    for url, (start_key, end_key) in RANGES.items():
        if start_key in changes or end_key in changes:
            parts.append(
                (url, f"{changes.get(start_key, '')}{RANGE_SEPARATOR}{changes.get(end_key, '')}")
            )
    for f in FIELDS:
        if f.key in changes:
            parts.append((f.url, _format_value(changes[f.key])))
    parts.append(("metric", view.metric))
    parts.append(("arcs", view.arcs))
    if view.selected:
        parts.append(("sel", RANGE_SEPARATOR.join(view.selected)))
    return "?" + "&".join(f"{k}={quote(v, safe=':~-._')}" for k, v in parts)


def _parse_value(f: Field, text: str) -> Any:
    if f.kind == "text":
        if not text or len(text) > 80:
            raise ValueError
        return text
    if f.kind == "optional_float" and text.lower() == NONE_TEXT:
        return None
    if f.kind == "int":
        return int(text)
    value = float(text)
    if not math.isfinite(value):
        raise ValueError
    return value


def from_query(search: str | None) -> ViewState:
    """Read a view from a URL query; unreadable parts are skipped and named in ``notes``.

    The values are only parsed here; whether they make a valid case is checked when the case
    is built (the engine's own messages then name the setting).
    """
    if not search:
        return ViewState()
    notes: list[str] = []
    values = dict(parse_qsl(search.lstrip("?"), keep_blank_values=True))
    case = values.get("case", DEFAULT_CASE_ID)
    if not CASE_ID_RE.fullmatch(case):
        notes.append(f"link: case '{case[:40]}' is not a case name; showing the default case")
        case = DEFAULT_CASE_ID
    changes: dict[str, Any] = {}
    for url, (start_key, end_key) in RANGES.items():
        if url in values:
            start, sep, end = values[url].partition(RANGE_SEPARATOR)
            if not sep:
                notes.append(f"link: {url}={values[url][:40]} is not 'start{RANGE_SEPARATOR}end'")
                continue
            if start:
                changes[start_key] = start
            if end:
                changes[end_key] = end
    for url, f in FIELD_BY_URL.items():
        if url in values:
            try:
                changes[f.key] = _parse_value(f, values[url])
            except ValueError:
                notes.append(f"link: {url}={values[url][:40]} is not a valid value; ignored")
    metric = values.get("metric", DEFAULT_METRIC)
    if metric not in MAP_METRICS:
        notes.append(f"link: metric '{metric[:40]}' is not offered; showing C3")
        metric = DEFAULT_METRIC
    arcs = values.get("arcs", "best")
    if not _ARCS_RE.fullmatch(arcs):
        notes.append(f"link: arcs '{arcs[:20]}' is not best, 0, or N followed by L or H")
        arcs = "best"
    selected = None
    if "sel" in values:
        dep, sep, arr = values["sel"].partition(RANGE_SEPARATOR)
        if sep and dep and arr:
            selected = (dep, arr)
        else:
            notes.append("link: sel is not 'departure~arrival'; selecting the best arc")
    return ViewState(
        case=case,
        changes=tuple(sorted(changes.items())),
        metric=metric,
        arcs=arcs,
        selected=selected,
        notes=tuple(notes),
    )


# ---------------------------------------------------------------------------------------------
# Arc choices


def slot_label(revolutions: int, branch: str) -> str:
    """The name of one arc slot: ``"N = 0"`` or ``"N = 2, high branch"`` (branch names are
    ``solver.mechanics.lambert.BRANCH_NAMES``)."""
    return "N = 0" if revolutions == 0 else f"N = {revolutions}, {branch} branch"


def arcs_label(arcs: str) -> str:
    """The name of an arcs choice, as the picker and the map's title show it."""
    revolutions, branch = parse_arcs(arcs)
    if revolutions is None:
        return "best arc of each cell"
    if revolutions == 0:
        return "single revolution (N = 0)"
    return slot_label(revolutions, branch or "low")


def arc_choices(max_revolutions: int) -> list[tuple[str, str]]:
    """(value, label) of the arcs a map can show for a case with this many revolutions."""
    values = ["best"] if max_revolutions else []
    values.append("0")
    for n in range(1, max_revolutions + 1):
        values += [f"{n}L", f"{n}H"]
    return [(v, arcs_label(v)) for v in values]


_SINGLE, _LOW, _HIGH = (BRANCH_NAMES[k] for k in (BRANCH_SINGLE, BRANCH_LOW, BRANCH_HIGH))


def parse_arcs(arcs: str) -> tuple[int | None, str | None]:
    """(revolutions, branch name) of an arcs choice; (None, None) for the best arc of each cell.
    Branch names are ``solver.mechanics.lambert.BRANCH_NAMES``; ``L``/``H`` in links."""
    if arcs == "best":
        return None, None
    if arcs == "0":
        return 0, _SINGLE
    return int(arcs[:-1]), _LOW if arcs.endswith("L") else _HIGH


def arcs_value(revolutions: int, branch: str) -> str:
    """Inverse of :func:`parse_arcs` for one arc."""
    return "0" if revolutions == 0 else f"{revolutions}{'L' if branch == _LOW else 'H'}"


def fit_arcs(arcs: str, max_revolutions: int) -> str:
    """The arcs choice, kept if the case offers it, else the case's default."""
    offered = {value for value, _ in arc_choices(max_revolutions)}
    if arcs in offered:
        return arcs
    return "best" if max_revolutions else "0"


# ---------------------------------------------------------------------------------------------
# Dates on the sliders: days since 1970-01-01 UTC (POSIX days, no leap seconds)


def iso_to_unix_days(text: str) -> float:
    """Days since 1970-01-01T00:00Z of an ISO 8601 UTC date or date-time."""
    text = text.strip().replace(" ", "T")
    if text.endswith(("Z", "z")):
        text = text[:-1]
    if text.endswith("+00:00"):
        text = text[:-6]
    moment = dt.datetime.fromisoformat(text).replace(tzinfo=dt.UTC)
    return (moment - _UNIX_EPOCH).total_seconds() / SECONDS_PER_DAY


def unix_days_to_iso(days: float) -> str:
    """ISO 8601 UTC text of a slider value, to the minute (the date alone at midnight)."""
    moment = _UNIX_EPOCH + dt.timedelta(minutes=round(float(days) * MINUTES_PER_DAY))
    day = f"{moment.year:04d}-{moment.month:02d}-{moment.day:02d}"  # %Y does not pad year 1
    if moment.hour == 0 and moment.minute == 0:
        return day
    return f"{day}T{moment.hour:02d}:{moment.minute:02d}"


def unix_ms_to_iso(ms: float) -> str:
    """ISO 8601 UTC text of a plot's date coordinate (milliseconds since 1970), to the second."""
    moment = _UNIX_EPOCH + dt.timedelta(milliseconds=round(float(ms)))
    return moment.strftime("%Y-%m-%dT%H:%M:%SZ")


def plot_x_to_unix_ms(value: Any) -> float:
    """A date-axis coordinate from plotly event data (a number of ms or a date string) in ms."""
    if isinstance(value, (int, float)):
        return float(value)
    return iso_to_unix_days(str(value)) * MS_PER_DAY


# ---------------------------------------------------------------------------------------------
# Control values <-> case changes


def case_setting(case: Case, key: str) -> Any:
    """Current value of a dotted case key (None when the case leaves it out).

    The launch vehicle is the one the case uses: the first listed when the case names none, so
    a control showing it is no change to the case (and adds nothing to the link).
    """
    if key == "spacecraft.vehicle":
        vehicle = case.mass.vehicle
        return None if vehicle is None else vehicle.name
    raw = to_toml_dict(case)
    section, name = key.split(".", 1)
    return raw.get(section, {}).get(name)


def control_values(case: Case) -> dict[str, Any]:
    """Control values that show ``case`` (dotted keys; windows in slider days)."""
    values: dict[str, Any] = {f.key: case_setting(case, f.key) for f in FIELDS}
    for key, value in values.items():
        # A five-minute step is 0.00347222... days; sixteen digits of it help nobody.
        if isinstance(value, float):
            values[key] = float(f"{value:.6g}")
    values["dep"] = [iso_to_unix_days(case.departure_start), iso_to_unix_days(case.departure_end)]
    values["arr"] = [iso_to_unix_days(case.arrival_start), iso_to_unix_days(case.arrival_end)]
    return values


def metric_label(metric: str) -> str:
    m = METRICS[metric]
    return f"{m.label} ({m.unit})" if m.unit else m.label


__all__ = [
    "CASE_ID_RE",
    "DEFAULT_CASE_ID",
    "DEFAULT_METRIC",
    "FIELDS",
    "MAP_METRICS",
    "ViewState",
    "arc_choices",
    "arcs_label",
    "arcs_value",
    "control_values",
    "fit_arcs",
    "from_query",
    "iso_to_unix_days",
    "parse_arcs",
    "plot_x_to_unix_ms",
    "slot_label",
    "to_query",
    "unix_days_to_iso",
    "unix_ms_to_iso",
]
