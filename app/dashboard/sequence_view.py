"""The sequence page's view: what one tab shows, its URL query, and the settings it changes.

A sequence view is a case with a ``[sequence]`` section, the changes made to it with the page's
controls, how its candidates are searched (global search or grid, how many, how long, which
seed), which candidate is shown (its rank, or its own dates when a leg-map click re-timed it),
which leg the leg map re-times, and how that map is drawn (metric, span, step). The search
follows from the first part, everything else from the rest, so a link that carries the view
shows a teammate the same thing::

    /sequence?case=harrow_jupiter_veega&cand=2&leg=2&metric=dv_total_km_s
      &tofmax3=760&c3max=20&seq=earth-venus-earth-earth-jupiter
      &at=2034-04-09T12:00:00Z~2034-08-18T...&arcs=0.0.*.0&res=15.6/22.5

The settings the page edits come from the two tables of settings: the window settings
(``solver.window.settings.SETTINGS``: the departure window and step, the limits) and the
sequence settings (``solver.sequence.settings.SEQUENCE_SETTINGS``, every entry with a ``url``:
each leg's body, TOF bounds, flyby altitude and stay, the sequence's objective and limits).
Each change is keyed by the case file key the parser names in its messages
(``sequence.legs[2].tof_max_days``, ``sequence[2].duration_max_days`` for the second of several
``[[sequence]]`` tables), so a refused value's message lands on its own control.

Everything here is plain data and string handling, testable without Dash.
"""

from __future__ import annotations

import copy
import math
import re
from dataclasses import dataclass, field, replace
from typing import Any
from urllib.parse import parse_qsl, quote

from solver.errors import InputError
from solver.sequence.leg_map import LEG_MAP_METRICS, MAX_AXIS_POINTS
from solver.sequence.settings import SEQUENCE_SETTING, SEQUENCE_SETTINGS
from solver.window.settings import SETTING, Setting

from .view_state import CASE_ID_RE

PATH = "/sequence"
SEARCH_MODES = ("global", "grid")
"""``global``: the time-limited global search (every sequence, resonant legs included);
``grid``: the repeatable grid search with pruning (sequences without resonant legs)."""

DEFAULT_MODE = "global"
DEFAULT_TOP = 5
DEFAULT_TIME_S = 20.0
DEFAULT_SEED = 0
DEFAULT_METRIC = "dv_total_km_s"
DEFAULT_SPAN_DAYS = 60.0
DEFAULT_STEP_DAYS = 1.0
TOP_RANGE = (1, 20)
TIME_RANGE_S = (2.0, 600.0)
SEED_RANGE = (0, 1_000_000)
SPAN_RANGE_DAYS = (1.0, 400.0)
STEP_RANGE_DAYS = (1.0 / 1440.0, 100.0)
MAX_DATES = 40
_DATE_RE = re.compile(
    r"[0-9]{4}-[0-9]{2}-[0-9]{2}([T ][0-9]{2}:[0-9]{2}(:[0-9]{2}(\.[0-9]+)?)?)?Z?"
)
_SEQ_NAME_RE = re.compile(r"[^\x00-\x1f\x7f]{1,80}")
_ARCS_RE = re.compile(r"(0|[0-9]{1,2}[lh]|\*)(\.(0|[0-9]{1,2}[lh]|\*)){0,15}")
_RES_RE = re.compile(r"[-+0-9.]{1,20}/[-+0-9.]{1,20}(,[-+0-9.]{1,20}/[-+0-9.]{1,20}){0,15}")
_MAX_TEXT = 80

# ---------------------------------------------------------------------------------------------
# The settings the page edits


WINDOW_KEYS = (
    "window.departure_start",
    "window.departure_end",
    "window.departure_step_days",
    "limits.c3_max_km2_s2",
    "limits.dla_max_deg",
    "limits.vinf_arrival_max_km_s",
)
"""Window settings the page edits (the departure window, its step, the limits at the two ends);
each leg's TOF bounds replace the one-leg TOF limits."""

SEQUENCE_KEYS = tuple(
    s.key for s in SEQUENCE_SETTINGS if s.url is not None and s.section == "sequence"
)
LEG_KEYS = tuple(s.key for s in SEQUENCE_SETTINGS if s.url is not None and s.section == "leg")

_KEY_RE = re.compile(
    r"sequence(?:\[(?P<s>[1-9][0-9]?)\])?(?:\.legs\[(?P<k>[1-9][0-9]?)\])?\.(?P<name>[a-z_]+)"
)
_URL_RE = re.compile(r"(?:s(?P<s>[1-9][0-9]?))?(?P<url>[a-z]+?)(?P<k>[1-9][0-9]?)?")


@dataclass(frozen=True)
class Place:
    """Where a changed setting lives: its table entry, and (for a sequence setting) which
    sequence (1-based, 0 for a lone ``[sequence]`` table) and which leg (1-based, 0 for the
    sequence itself)."""

    setting: Setting
    sequence: int = 0
    leg: int = 0


def place_of(key: str) -> Place:
    """The setting a change key names (InputError for a key the page does not edit)."""
    if key in WINDOW_KEYS:
        return Place(SETTING[key])
    m = _KEY_RE.fullmatch(key)
    if m is not None:
        leg = int(m["k"]) if m["k"] else 0
        table_key = f"{'leg' if leg else 'sequence'}.{m['name']}"
        setting = SEQUENCE_SETTING.get(table_key)
        if setting is not None and setting.url is not None:
            return Place(setting, int(m["s"]) if m["s"] else 0, leg)
    raise InputError("setting", key[:_MAX_TEXT], "a setting the sequence page edits")


def change_key(setting: Setting, sequence: int = 0, leg: int = 0) -> str:
    """The change key of a setting: the case file key the parser names in its messages."""
    if setting.key in WINDOW_KEYS:
        return setting.key
    head = "sequence" if sequence == 0 else f"sequence[{sequence}]"
    if leg:
        head += f".legs[{leg}]"
    return f"{head}.{setting.name}"


def url_name(key: str) -> str:
    """A change key's link parameter: the setting's ``url``, with the sequence (``s2``) and leg
    number (``tofmax3``)."""
    if key in ("window.departure_start", "window.departure_end"):
        return "dep"
    place = place_of(key)
    assert place.setting.url is not None
    prefix = f"s{place.sequence}" if place.sequence else ""
    suffix = str(place.leg) if place.leg else ""
    return f"{prefix}{place.setting.url}{suffix}"


_WINDOW_URLS = {SETTING[k].url: k for k in WINDOW_KEYS if SETTING[k].url}
_SEQUENCE_URLS = {
    s.url: s for s in SEQUENCE_SETTINGS if s.url is not None and s.section == "sequence"
}
_LEG_URLS = {s.url: s for s in SEQUENCE_SETTINGS if s.url is not None and s.section == "leg"}


def key_of_url(name: str) -> str | None:
    """The change key of a link parameter (None for one that names no setting)."""
    if name in _WINDOW_URLS:
        return _WINDOW_URLS[name]
    m = _URL_RE.fullmatch(name)
    if m is None:
        return None
    sequence = int(m["s"]) if m["s"] else 0
    if m["k"]:
        setting = _LEG_URLS.get(m["url"])
        return change_key(setting, sequence, int(m["k"])) if setting else None
    setting = _SEQUENCE_URLS.get(m["url"])
    return change_key(setting, sequence) if setting else None


def read_value(key: str, raw: Any) -> Any:
    """A control's value checked alone against its setting (kind and bounds); None clears an
    optional setting. InputError names the key, the value and what is accepted."""
    setting = place_of(key).setting
    if raw is None or (isinstance(raw, str) and not raw.strip()):
        if setting.default is None and not setting.required:
            return None
        raise InputError(key, "(empty)", setting.accepted)
    if setting.kind in ("number", "integer") and isinstance(raw, str):
        try:
            raw = float(raw.replace("−", "-"))
        except ValueError:
            raise InputError(key, raw[:40], setting.accepted) from None
    if setting.kind == "integer" and isinstance(raw, float) and raw.is_integer():
        raw = int(raw)
    if isinstance(raw, float) and not math.isfinite(raw):
        raise InputError(key, raw, setting.accepted)
    if setting.kind == "body":
        if not isinstance(raw, str) or not 0 < len(raw.strip()) <= _MAX_TEXT:
            raise InputError(key, str(raw)[:40], setting.accepted)
        return raw.strip()
    if setting.kind == "date":
        if not isinstance(raw, str) or not _DATE_RE.fullmatch(raw.strip()):
            raise InputError(key, str(raw)[:40], setting.accepted)
        return raw.strip()
    try:
        return setting.check(raw)
    except InputError as exc:
        raise InputError(key, exc.value, exc.accepted) from None


def apply_changes(document: dict[str, Any], changes: dict[str, Any]) -> dict[str, Any]:
    """A case file's parsed TOML with the view's changes written in (a new dict). A change
    whose table the file lacks (a leg it does not have) raises InputError naming the key."""
    out = copy.deepcopy(document)
    for key, value in changes.items():
        place = place_of(key)
        if key in WINDOW_KEYS:
            table = out.setdefault(place.setting.section, {})
        else:
            section = out.get("sequence")
            if place.sequence == 0 and isinstance(section, dict):
                table = section
            elif place.sequence and isinstance(section, list) and place.sequence <= len(section):
                table = section[place.sequence - 1]
            else:
                raise InputError(key, value, "a setting of a sequence the case file has")
            if place.leg:
                legs = table.get("legs")
                if not isinstance(legs, list) or place.leg > len(legs):
                    raise InputError(key, value, "a setting of a leg the sequence has")
                table = legs[place.leg - 1]
        if not isinstance(table, dict):
            raise InputError(key, value, "a setting of a table the case file has")
        if value is None:
            table.pop(place.setting.name, None)
        else:
            table[place.setting.name] = value
    return out


# ---------------------------------------------------------------------------------------------
# The view


@dataclass(frozen=True)
class SequenceView:
    """What one tab of the sequence page shows.

    Attributes
    ----------
    case : str
        Case id (a sample's stem or ``upload-<hash>``).
    changes : tuple of (key, value)
        Changes to the case, sorted by key (keys as :func:`change_key` makes them).
    mode, top, time_s, seed
        The search: ``global`` (time limit ``time_s``, ``seed``) or ``grid``, ``top``
        candidates.
    cand : int
        The candidate shown, by rank (1-based).
    seq, at, arcs, res : str, tuple of str, str, str or None
        A re-timed candidate (a leg-map click, or a link): its sequence, encounter dates (UTC),
        arcs and resonant legs' angles, as ``solver.sequence.record.link_parameters`` writes
        them; None shows candidate ``cand`` as the search ranked it.
    leg : int
        The leg the leg map re-times (1-based).
    metric : str
        What the leg map is coloured by (``solver.sequence.leg_map.LEG_MAP_METRICS``).
    span_days, step_days : float
        The leg map's half-width about the candidate's dates and its step.
    """

    case: str
    changes: tuple[tuple[str, Any], ...] = ()
    mode: str = DEFAULT_MODE
    top: int = DEFAULT_TOP
    time_s: float = DEFAULT_TIME_S
    seed: int = DEFAULT_SEED
    cand: int = 1
    seq: str | None = None
    at: tuple[str, ...] | None = None
    arcs: str | None = None
    res: str | None = None
    leg: int = 1
    metric: str = DEFAULT_METRIC
    span_days: float = DEFAULT_SPAN_DAYS
    step_days: float = DEFAULT_STEP_DAYS
    notes: tuple[str, ...] = field(default=(), compare=False)

    def change_dict(self) -> dict[str, Any]:
        return dict(self.changes)

    def with_changes(self, changes: dict[str, Any]) -> SequenceView:
        return replace(self, changes=tuple(sorted(changes.items())))

    def search_part(self) -> SequenceView:
        """The part that decides the search (the case, its changes, the search settings)."""
        return SequenceView(
            case=self.case,
            changes=self.changes,
            mode=self.mode,
            top=self.top,
            time_s=self.time_s,
            seed=self.seed,
        )

    def ranked(self) -> SequenceView:
        """The view of candidate ``cand`` as ranked (a re-timing dropped)."""
        return replace(self, seq=None, at=None, arcs=None, res=None)

    @property
    def link(self) -> dict[str, str]:
        """A re-timed candidate's link parameters (``candidate_from_link`` reads them)."""
        if self.at is None:
            return {}
        out = {"seq": self.seq or "", "at": "~".join(self.at)}
        if self.arcs:
            out["arcs"] = self.arcs
        if self.res:
            out["res"] = self.res
        return out

    def to_dict(self) -> dict[str, Any]:
        """JSON-able form for a dcc.Store."""
        return {
            "case": self.case,
            "changes": [[k, v] for k, v in self.changes],
            "mode": self.mode,
            "top": self.top,
            "time_s": self.time_s,
            "seed": self.seed,
            "cand": self.cand,
            "seq": self.seq,
            "at": list(self.at) if self.at else None,
            "arcs": self.arcs,
            "res": self.res,
            "leg": self.leg,
            "metric": self.metric,
            "span_days": self.span_days,
            "step_days": self.step_days,
        }

    @classmethod
    def from_dict(cls, data: Any) -> SequenceView:
        """The view a page's store holds, every value checked (InputError naming the part)."""
        if not isinstance(data, dict):
            raise InputError("stored view", _short(data), "a view object")
        known = set(cls.__dataclass_fields__) - {"notes"}
        unknown = set(data) - known
        if unknown:
            raise InputError("stored view", _short(sorted(map(str, unknown))[0]), "a view key")
        case = data.get("case")
        if not isinstance(case, str) or not CASE_ID_RE.fullmatch(case):
            raise InputError("stored view case", _short(case), "a case name")
        changes = data.get("changes") or []
        if not isinstance(changes, list) or len(changes) > 200:
            raise InputError("stored view changes", _short(changes), "a list of [key, value]")
        checked: dict[str, Any] = {}
        for item in changes:
            if not isinstance(item, list | tuple) or len(item) != 2:
                raise InputError("stored view changes", _short(item), "a [key, value] pair")
            key, value = item
            if not isinstance(key, str):
                raise InputError("stored view changes", _short(key), "a setting's key")
            checked[key] = read_value(key, value)
        at = data.get("at")
        if at is not None:
            at = _dates(at, "stored view at")
        return cls(
            case=case,
            changes=tuple(sorted(checked.items())),
            mode=_choice(data.get("mode", DEFAULT_MODE), SEARCH_MODES, "stored view mode"),
            top=_integer(data.get("top", DEFAULT_TOP), TOP_RANGE, "stored view top"),
            time_s=_number(data.get("time_s", DEFAULT_TIME_S), TIME_RANGE_S, "stored view time"),
            seed=_integer(data.get("seed", DEFAULT_SEED), SEED_RANGE, "stored view seed"),
            cand=_integer(data.get("cand", 1), (1, TOP_RANGE[1]), "stored view cand"),
            seq=_text(data.get("seq"), _SEQ_NAME_RE, "stored view seq"),
            at=at,
            arcs=_text(data.get("arcs"), _ARCS_RE, "stored view arcs"),
            res=_text(data.get("res"), _RES_RE, "stored view res"),
            leg=_integer(data.get("leg", 1), (1, 12), "stored view leg"),
            metric=_choice(
                data.get("metric", DEFAULT_METRIC), tuple(LEG_MAP_METRICS), "stored view metric"
            ),
            span_days=_number(
                data.get("span_days", DEFAULT_SPAN_DAYS), SPAN_RANGE_DAYS, "stored view span"
            ),
            step_days=_number(
                data.get("step_days", DEFAULT_STEP_DAYS), STEP_RANGE_DAYS, "stored view step"
            ),
        )


def _short(value: Any, n: int = 40) -> str:
    text = value if isinstance(value, str) and value.isprintable() else repr(value)
    return text if len(text) <= n else text[: n - 3] + "..."


def _choice(value: Any, choices: tuple[str, ...], where: str) -> str:
    if value not in choices:
        raise InputError(where, _short(value), "one of " + ", ".join(choices))
    return str(value)


def _integer(value: Any, bounds: tuple[int, int], where: str) -> int:
    if isinstance(value, float) and value.is_integer():
        value = int(value)
    if isinstance(value, bool) or not isinstance(value, int) or not bounds[0] <= value <= bounds[1]:
        raise InputError(where, _short(value), f"an integer from {bounds[0]} to {bounds[1]}")
    return value


def _number(value: Any, bounds: tuple[float, float], where: str) -> float:
    ok = isinstance(value, int | float) and not isinstance(value, bool)
    if not ok or not math.isfinite(value) or not bounds[0] <= value <= bounds[1]:
        raise InputError(where, _short(value), f"a number from {bounds[0]:g} to {bounds[1]:g}")
    return float(value)


def _text(value: Any, pattern: re.Pattern, where: str) -> str | None:
    if value is None:
        return None
    if not isinstance(value, str) or not pattern.fullmatch(value):
        raise InputError(where, _short(value), "what the page writes there")
    return value


def _dates(value: Any, where: str) -> tuple[str, ...]:
    if isinstance(value, str):
        value = value.split("~")
    if (
        not isinstance(value, list | tuple)
        or not 2 <= len(value) <= MAX_DATES
        or not all(isinstance(d, str) and _DATE_RE.fullmatch(d) for d in value)
    ):
        raise InputError(where, _short(value), "the encounter dates, UTC, joined by '~'")
    return tuple(value)


# ---------------------------------------------------------------------------------------------
# URL query


def _format(value: Any) -> str:
    if value is None:
        return "none"
    if isinstance(value, float):
        return f"{value:.10g}"
    return str(value)


def to_query(view: SequenceView, *, selection: bool = True) -> str:
    """The URL query (with its leading ``?``) that carries ``view``; ``selection=False`` stops
    after the search settings (the search's identity)."""
    changes = view.change_dict()
    parts: list[tuple[str, str]] = [("case", view.case)]
    start, end = changes.get("window.departure_start"), changes.get("window.departure_end")
    if start is not None or end is not None:
        parts.append(("dep", f"{start or ''}~{end or ''}"))
    for key in sorted(changes, key=_url_order):
        if key in ("window.departure_start", "window.departure_end"):
            continue
        parts.append((url_name(key), _format(changes[key])))
    if view.mode != DEFAULT_MODE:
        parts.append(("search", view.mode))
    if view.top != DEFAULT_TOP:
        parts.append(("top", str(view.top)))
    if view.mode == "global":
        if view.time_s != DEFAULT_TIME_S:
            parts.append(("time", _format(view.time_s)))
        if view.seed != DEFAULT_SEED:
            parts.append(("seed", str(view.seed)))
    if selection:
        parts.append(("cand", str(view.cand)))
        parts.append(("leg", str(view.leg)))
        parts.append(("metric", view.metric))
        if view.span_days != DEFAULT_SPAN_DAYS:
            parts.append(("span", _format(view.span_days)))
        if view.step_days != DEFAULT_STEP_DAYS:
            parts.append(("step", _format(view.step_days)))
        parts.extend(view.link.items())
    return "?" + "&".join(f"{k}={quote(v, safe=':~-._/*,')}" for k, v in parts)


def _url_order(key: str) -> tuple:
    place = place_of(key)
    table = 0 if key in WINDOW_KEYS else 1
    return (table, place.sequence, place.leg, key)


def from_query(search: str | None, default_case: str) -> SequenceView:
    """Read a view from a URL query; unreadable parts are skipped and named in ``notes``.

    Values are parsed here; whether they make a valid sequence case is checked when the case is
    built (the parser's messages then name the setting).
    """
    values = dict(parse_qsl((search or "").lstrip("?"), keep_blank_values=True))
    notes: list[str] = []
    case = values.pop("case", default_case)
    if not CASE_ID_RE.fullmatch(case):
        notes.append(f"link: case '{case[:40]}' is not a case name; showing the default case")
        case = default_case
    view = SequenceView(case=case)
    changes: dict[str, Any] = {}
    if "dep" in values:
        start, sep, end = values.pop("dep").partition("~")
        if sep:
            for key, text in (("window.departure_start", start), ("window.departure_end", end)):
                if text:
                    try:
                        changes[key] = read_value(key, text)
                    except InputError as exc:
                        notes.append(f"link: {exc}; ignored")
        else:
            notes.append("link: dep is not 'start~end'; ignored")

    def take(name: str, read, default):
        if name not in values:
            return default
        text = values.pop(name)
        try:
            return read(text)
        except (InputError, ValueError) as exc:
            notes.append(f"link: {name}={text[:40]} is not accepted ({exc}); ignored")
            return default

    mode = take("search", lambda t: _choice(t, SEARCH_MODES, "search"), DEFAULT_MODE)
    top = take("top", lambda t: _integer(int(t), TOP_RANGE, "top"), DEFAULT_TOP)
    time_s = take("time", lambda t: _number(float(t), TIME_RANGE_S, "time"), DEFAULT_TIME_S)
    seed = take("seed", lambda t: _integer(int(t), SEED_RANGE, "seed"), DEFAULT_SEED)
    cand = take("cand", lambda t: _integer(int(t), (1, TOP_RANGE[1]), "cand"), 1)
    leg = take("leg", lambda t: _integer(int(t), (1, 12), "leg"), 1)
    metric = take("metric", lambda t: _choice(t, tuple(LEG_MAP_METRICS), "metric"), DEFAULT_METRIC)
    span = take("span", lambda t: _number(float(t), SPAN_RANGE_DAYS, "span"), DEFAULT_SPAN_DAYS)
    step = take("step", lambda t: _number(float(t), STEP_RANGE_DAYS, "step"), DEFAULT_STEP_DAYS)
    at = take("at", lambda t: _dates(t, "at"), None)
    seq = take("seq", lambda t: _text(t, _SEQ_NAME_RE, "seq"), None)
    arcs = take("arcs", lambda t: _text(t, _ARCS_RE, "arcs"), None)
    res = take("res", lambda t: _text(t, _RES_RE, "res"), None)
    if at is None and (seq or arcs or res):
        notes.append("link: seq, arcs or res without at (the dates); showing the ranked one")
        seq = arcs = res = None
    for name, text in values.items():
        key = key_of_url(name)
        if key is None:
            notes.append(f"link: {name[:40]} is not a setting of this page; ignored")
            continue
        try:
            changes[key] = None if text.lower() == "none" else read_value(key, text)
        except InputError as exc:
            notes.append(f"link: {exc}; ignored")
    return replace(
        view,
        changes=tuple(sorted(changes.items())),
        mode=mode,
        top=top,
        time_s=time_s,
        seed=seed,
        cand=cand,
        seq=seq,
        at=at,
        arcs=arcs,
        res=res,
        leg=leg,
        metric=metric,
        span_days=span,
        step_days=step,
        notes=tuple(notes),
    )


def axis_points(span_days: float, step_days: float) -> int:
    """Dates per axis of a leg map with this span and step."""
    return 2 * math.floor(span_days / step_days + 1e-9) + 1


def check_leg_map_size(span_days: float, step_days: float) -> None:
    """InputError when a leg map would hold more dates per axis than the engine allows."""
    n = axis_points(span_days, step_days)
    if n > MAX_AXIS_POINTS:
        raise InputError(
            "leg map step",
            step_days,
            f"a step of at least {2 * span_days / (MAX_AXIS_POINTS - 1):.3g} days for a span of "
            f"±{span_days:g} days (at most {MAX_AXIS_POINTS} dates per axis)",
        )


# ---------------------------------------------------------------------------------------------
# The settings a view's controls show, and how a change to them applies


def setting_values(sequence_case: Any, array: bool) -> dict[str, Any]:
    """What every control of a sequence case's settings panel shows (by change key);
    ``array``: the case file holds ``[[sequence]]`` tables (keys name their number)."""
    case = sequence_case.case
    limits = case.limits
    out: dict[str, Any] = {
        "window.departure_start": case.departure_start,
        "window.departure_end": case.departure_end,
        "window.departure_step_days": case.departure_step_days,
        "limits.c3_max_km2_s2": limits.c3_max_km2_s2,
        "limits.dla_max_deg": limits.dla_max_deg,
        "limits.vinf_arrival_max_km_s": limits.vinf_arrival_max_km_s,
    }
    for s, spec in enumerate(sequence_case.sequences, start=1):
        index = s if array else 0
        setting = SEQUENCE_SETTING
        out[change_key(setting["sequence.objective"], index)] = spec.objective
        out[change_key(setting["sequence.unpowered_only"], index)] = (
            "true" if spec.unpowered_only else "false"
        )
        out[change_key(setting["sequence.duration_max_days"], index)] = spec.duration_max_days
        out[change_key(setting["sequence.flyby_dv_max_km_s"], index)] = spec.flyby_dv_max_km_s
        for k, leg in enumerate(spec.legs, start=1):
            out[change_key(setting["leg.to"], index, k)] = leg.to_body
            out[change_key(setting["leg.tof_min_days"], index, k)] = leg.tof_min_days
            out[change_key(setting["leg.tof_max_days"], index, k)] = leg.tof_max_days
            if leg.kind == "flyby":
                out[change_key(setting["leg.altitude_min_km"], index, k)] = leg.altitude_min_km
            if leg.kind == "stop":
                out[change_key(setting["leg.stay_min_days"], index, k)] = leg.stay_min_days
                out[change_key(setting["leg.stay_max_days"], index, k)] = leg.stay_max_days
    return out


def same_value(key: str, a: Any, b: Any) -> bool:
    """Whether a control's value is the one shown (six significant digits, dates to the
    minute, names without case)."""
    if a is None or b is None:
        return a is None and b is None
    if isinstance(a, int | float) and isinstance(b, int | float):
        return math.isclose(float(a), float(b), rel_tol=1e-6, abs_tol=1e-12)
    if place_of(key).setting.kind == "date":
        from .view_state import iso_to_unix_days

        try:
            return abs(iso_to_unix_days(str(a)) - iso_to_unix_days(str(b))) < 0.5 / 1440.0
        except ValueError:
            return False
    return str(a).strip().lower() == str(b).strip().lower()


def apply_settings(
    build,
    current: SequenceView,
    values: dict[str, Any],
    fired: set[str],
    now: dict[str, Any],
    base: dict[str, Any],
) -> tuple[SequenceView, Any, dict[str, str]]:
    """The view the settings controls describe, its sequence case, and the values refused.

    Each value is read alone (kind and bounds); the changes are then applied one at a time (the
    controls that did not fire first: values refused earlier and still in their boxes), each
    kept only if the case builds with it (``build(view)``, which raises InputError naming the
    key); a refused one is reported on its own control and tried again after the others, until
    nothing more applies.

    Parameters
    ----------
    build : callable(SequenceView) -> SequenceCase
    current : SequenceView
        The view before the change (a valid one).
    values : dict
        Control values by change key.
    fired : set of str
        Keys of the controls that fired.
    now, base : dict
        What the controls show for the current view and for the case file itself
        (:func:`setting_values`).
    """
    errors: dict[str, str] = {}
    units: list[tuple[str, Any]] = []
    for key, raw in values.items():
        try:
            value = read_value(key, raw)
        except InputError as exc:
            errors[key] = f"Not applied: {exc}"
            continue
        if key in now and not same_value(key, value, now.get(key)):
            units.append((key, value))
    units.sort(key=lambda unit: unit[0] in fired)
    applied = current.change_dict()
    view = current
    sequence_case = build(current)
    pending = list(units)
    progress = True
    while pending and progress:
        progress = False
        for unit in list(pending):
            key, value = unit
            trial_changes = dict(applied)
            if key in base and same_value(key, value, base[key]):
                trial_changes.pop(key, None)  # back to the case file's own value
            else:
                trial_changes[key] = value
            trial = current.with_changes(trial_changes)
            try:
                trial_case = build(trial)
            except InputError as exc:
                which = "" if exc.field == key else f" ({place_of(key).setting.label} = {value})"
                errors[key] = f"Not applied{which}: {exc}"
                continue
            applied = trial_changes
            view, sequence_case = trial, trial_case
            pending.remove(unit)
            errors.pop(key, None)
            progress = True
    if view.changes != current.changes:
        view = replace(view.ranked(), cand=1)
    return view, sequence_case, errors


__all__ = [
    "DEFAULT_METRIC",
    "DEFAULT_MODE",
    "LEG_KEYS",
    "PATH",
    "SEARCH_MODES",
    "SEQUENCE_KEYS",
    "WINDOW_KEYS",
    "Place",
    "SequenceView",
    "apply_changes",
    "apply_settings",
    "axis_points",
    "change_key",
    "check_leg_map_size",
    "from_query",
    "key_of_url",
    "place_of",
    "read_value",
    "same_value",
    "setting_values",
    "to_query",
    "url_name",
]
