"""View state: what one browser tab shows, and its round trip through the page URL.

A view is a case (a sample file or an uploaded one), the changes the analyst made to it with
the controls, the metric on the window map, the arcs shown (the best arc of each cell or one
revolution count and branch) and the selected cell. Everything else (the grid, the figures,
the details) follows from it, so a link that carries the view shows a teammate the same thing.

Only differences from the case file travel in the URL, which keeps links short and lets a link
survive small edits to a sample case. The query looks like::

    ?case=tallis_rendezvous&metric=c3_km2_s2&arcs=best
     &dep=2035-11-01~2036-05-31&c3max=25&sel=2036-01-10T00:00Z~2036-08-02T00:00Z

Everything here is plain data and string handling, testable without Dash.
"""

from __future__ import annotations

import datetime as dt
import math
import re
from dataclasses import dataclass, field, replace
from typing import Any
from urllib.parse import parse_qsl, quote

from solver.window.case import Case, to_toml_dict
from solver.window.metrics import METRICS
from solver.window.settings import SETTINGS, Setting

DEFAULT_CASE_ID = "tallis_rendezvous"
DEFAULT_METRIC = "c3_km2_s2"
MAP_METRICS = ("c3_km2_s2", "vinf_arrival_km_s", "dv_total_km_s", "dla_deg", "tof_days")
"""Metrics offered on the window map (the issue's five; the details panel shows all)."""
"""Map metrics that describe a launch vehicle's job; cases that leave a satellite open on Δv."""

RANGE_SEPARATOR = "~"  # unreserved in URLs, so links stay readable
_UNIX_EPOCH = dt.datetime(1970, 1, 1, tzinfo=dt.UTC)
_CASE_ID_RE = re.compile(r"[A-Za-z0-9_-]{1,80}")
_ARCS_RE = re.compile(r"best|0|[1-9][0-9]?[LH]")


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
    def from_dict(cls, data: dict[str, Any] | None) -> ViewState:
        if not data:
            return cls()
        selected = data.get("selected")
        return cls(
            case=str(data.get("case") or DEFAULT_CASE_ID),
            changes=tuple(sorted((str(k), v) for k, v in data.get("changes") or [])),
            metric=str(data.get("metric") or DEFAULT_METRIC),
            arcs=str(data.get("arcs") or "best"),
            selected=(str(selected[0]), str(selected[1])) if selected else None,
        )


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
    if not _CASE_ID_RE.fullmatch(case):
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


def arc_choices(max_revolutions: int) -> list[tuple[str, str]]:
    """(value, label) of the arcs a map can show for a case with this many revolutions."""
    choices = [("best", "best arc of each cell")] if max_revolutions else []
    choices.append(("0", "single revolution (N = 0)"))
    for n in range(1, max_revolutions + 1):
        choices.append((f"{n}L", f"N = {n}, low branch"))
        choices.append((f"{n}H", f"N = {n}, high branch"))
    return choices


def parse_arcs(arcs: str) -> tuple[int | None, str | None]:
    """(revolutions, branch) of an arcs choice; (None, None) for the best arc of each cell."""
    if arcs == "best":
        return None, None
    if arcs == "0":
        return 0, "single"
    return int(arcs[:-1]), "low" if arcs.endswith("L") else "high"


def arcs_value(revolutions: int, branch: str) -> str:
    """Inverse of :func:`parse_arcs` for one arc."""
    return "0" if revolutions == 0 else f"{revolutions}{'L' if branch == 'low' else 'H'}"


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
    return (moment - _UNIX_EPOCH).total_seconds() / 86400.0


def unix_days_to_iso(days: float) -> str:
    """ISO 8601 UTC text of a slider value, to the minute (the date alone at midnight)."""
    moment = _UNIX_EPOCH + dt.timedelta(minutes=round(float(days) * 1440.0))
    if moment.hour == 0 and moment.minute == 0:
        return moment.strftime("%Y-%m-%d")
    return moment.strftime("%Y-%m-%dT%H:%M")


def unix_ms_to_iso(ms: float) -> str:
    """ISO 8601 UTC text of a plot's date coordinate (milliseconds since 1970), to the second."""
    moment = _UNIX_EPOCH + dt.timedelta(milliseconds=round(float(ms)))
    return moment.strftime("%Y-%m-%dT%H:%M:%SZ")


def plot_x_to_unix_ms(value: Any) -> float:
    """A date-axis coordinate from plotly event data (a number of ms or a date string) in ms."""
    if isinstance(value, (int, float)):
        return float(value)
    return iso_to_unix_days(str(value)) * 86400000.0


# ---------------------------------------------------------------------------------------------
# Control values <-> case changes


def case_setting(case: Case, key: str) -> Any:
    """Current value of a dotted case key (None when the case leaves it out)."""
    raw = to_toml_dict(case)
    section, name = key.split(".", 1)
    return raw.get(section, {}).get(name)


def _same(a: Any, b: Any) -> bool:
    if a is None or b is None:
        return a is None and b is None
    if isinstance(a, (int, float)) and isinstance(b, (int, float)):
        # Controls show six significant digits (control_values), so a value read back from a
        # control is the case's own value when it agrees to that many.
        return math.isclose(float(a), float(b), rel_tol=1e-6, abs_tol=1e-12)
    return str(a).strip().lower() == str(b).strip().lower()


def _same_date(a: str, b: str) -> bool:
    try:
        return abs(iso_to_unix_days(a) - iso_to_unix_days(b)) < 0.5 / 1440.0
    except ValueError:
        return False


def changes_from_controls(base: Case, controls: dict[str, Any]) -> dict[str, Any]:
    """The case changes the control values make, relative to the case file ``base``.

    ``controls`` maps dotted keys to control values; the two windows come as
    ``{"dep": [start_days, end_days], "arr": [...]}`` in slider days. Values equal to the case
    file's are left out, so the URL only carries what the analyst changed.
    """
    changes: dict[str, Any] = {}
    for url, keys in RANGES.items():
        values = controls.get(url)
        if not values or len(values) != 2 or values[0] is None or values[1] is None:
            continue
        for key, days in zip(keys, values, strict=True):
            text = unix_days_to_iso(days)
            if not _same_date(text, str(case_setting(base, key))):
                changes[key] = text
    for f in FIELDS:
        if f.key not in controls:
            continue
        value = controls[f.key]
        if isinstance(value, str) and not value.strip() and f.kind == "optional_float":
            value = None
        if f.kind == "int" and isinstance(value, float) and value.is_integer():
            value = int(value)
        if not _same(value, case_setting(base, f.key)):
            changes[f.key] = value
    return changes


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
    "DEFAULT_CASE_ID",
    "DEFAULT_METRIC",
    "FIELDS",
    "MAP_METRICS",
    "ViewState",
    "arc_choices",
    "arcs_value",
    "changes_from_controls",
    "control_values",
    "fit_arcs",
    "from_query",
    "iso_to_unix_days",
    "parse_arcs",
    "plot_x_to_unix_ms",
    "to_query",
    "unix_days_to_iso",
    "unix_ms_to_iso",
]
