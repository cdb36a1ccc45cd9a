"""How a tab's view changes: from what fired (a link, the case picker, a control, a click, the
metric or arcs picker) and the current view to the next view, as pure functions.

Values a control holds are read one by one (``controls.Control.read``: kind and bounds), then the
case they make together is built; a value the case refuses is left out and its message shown on
its own control, while every other change still applies. A refused value stays in its box, so it
is read (and reported) again on every later change until it is corrected, and all the refused
values of a view are reported together, not only the first.

The case catalogue is passed in (anything with ``load(case_id)`` and ``effective(view)``), so the
branching here is tested with the real catalogue or a stand-in, without Dash.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field, replace
from typing import Any, Protocol

from solver.errors import InputError
from solver.time_units import MINUTE_DAYS
from solver.window.case import Case

from .controls import CONTROL_BY_KEY, CONTROLS, SLIDERS, error_target
from .view_state import ViewState, case_setting, fit_arcs, unix_days_to_iso

MESSAGE_CHARS = 300
"""Messages are cut to this many characters: one readable line, never a page of text."""

TRIGGERS = ("page", "case", "controls", "click", "metric", "arcs")


class Cases(Protocol):
    def load(self, case_id: str) -> Case: ...

    def effective(self, view: ViewState) -> Case: ...


def short(text: str, limit: int = MESSAGE_CHARS) -> str:
    """A message cut to one readable line."""
    text = " ".join(str(text).split())
    return text if len(text) <= limit else text[: limit - 1] + "…"


@dataclass(frozen=True)
class ViewPlan:
    """The outcome of one change.

    Attributes
    ----------
    view : ViewState or None
        The next view (None: the view does not change).
    case : Case or None
        Its case.
    fill : bool
        Set every control from the view and its case (a link or the case picker).
    errors : dict or None
        Refused values by where they show (a control's or slider's url name): the complete set,
        replacing what the page shows; None leaves the page's messages as they are.
    notes : list of str or None
        Lines for the message bar under the caution (None: leave it).
    """

    view: ViewState | None = None
    case: Case | None = None
    fill: bool = False
    errors: dict[str, str] | None = None
    notes: list[str] | None = None


def _same(a: Any, b: Any) -> bool:
    if a is None or b is None:
        return a is None and b is None
    if isinstance(a, int | float) and isinstance(b, int | float):
        # Controls show six significant digits, so a value read back from a control is the
        # case's own value when it agrees to that many.
        return math.isclose(float(a), float(b), rel_tol=1e-6, abs_tol=1e-12)
    return str(a).strip().lower() == str(b).strip().lower()


def _same_date(a: Any, b: Any) -> bool:
    from .view_state import iso_to_unix_days

    try:
        return abs(iso_to_unix_days(str(a)) - iso_to_unix_days(str(b))) < 0.5 * MINUTE_DAYS
    except ValueError:
        return False


def _slider_days(values: Any) -> list[float] | None:
    if (
        isinstance(values, list | tuple)
        and len(values) == 2
        and all(isinstance(v, int | float) and math.isfinite(v) for v in values)
    ):
        return [float(values[0]), float(values[1])]
    return None


def apply_controls(
    cases: Cases,
    current: ViewState,
    values: dict[str, Any],
    fired: Iterable[str] = (),
) -> tuple[ViewState, Case, dict[str, str]]:
    """The view the controls describe, and the values refused (by dotted key).

    Each value is read alone first (kind and bounds). The changes are then applied one at a
    time, the controls that did not fire this time (values refused earlier and still in their
    boxes) before those that did; a change the case refuses together with those applied before
    it is left out and reported on its own control. Refused changes are tried again after the
    others, until nothing more applies, so a value that a later change makes acceptable (a TOF
    minimum above the maximum, then a larger maximum) is applied then.

    Parameters
    ----------
    cases : Cases
        The catalogue (``load``, ``effective``).
    current : ViewState
        The view before the change (always a valid one).
    values : dict
        Control values by dotted case key; the date windows by slider url name (``dep``,
        ``arr``) as [start, end] in days since 1970 (slider values).
    fired : iterable of str
        Dotted keys (or slider url names) of the controls that fired this time.
    """
    base = cases.load(current.case)
    now = cases.effective(current)
    errors: dict[str, str] = {}
    units: list[tuple[str, dict[str, Any]]] = []  # (where its message shows, changes)

    def differs(key: str, value: Any) -> bool:
        if isinstance(value, str) and key.startswith("window."):
            return not _same_date(value, case_setting(now, key))
        return not _same(value, case_setting(now, key))

    for slider in SLIDERS:
        days = _slider_days(values.get(slider.url))
        if days is None:
            continue
        pair = {
            key: unix_days_to_iso(day)
            for key, day in zip((slider.start_key, slider.end_key), days, strict=True)
        }
        if any(differs(k, v) for k, v in pair.items()):
            units.append((slider.start_key, pair))
    for control in CONTROLS:
        if control.key not in values:
            continue
        try:
            value = control.read(values[control.key])
        except InputError as exc:
            errors[control.key] = short(f"Not applied: {exc}")
            continue
        if differs(control.key, value):
            units.append((control.key, {control.key: value}))

    fired_keys = set(_fired_keys(fired))
    units.sort(key=lambda unit: any(k in fired_keys for k in unit[1]))  # stable: not fired first

    def with_unit(changes: dict[str, Any], unit: dict[str, Any]) -> dict[str, Any]:
        out = dict(changes)
        for key, value in unit.items():
            original = case_setting(base, key)
            dated = isinstance(value, str) and key.startswith("window.")
            if _same(value, original) or (dated and _same_date(value, original)):
                out.pop(key, None)  # back to the case file's own value: the link omits it
            else:
                out[key] = value
        return out

    applied = current.change_dict()
    view, case = current, now
    pending = list(units)
    progress = True
    while pending and progress:
        progress = False
        for unit in list(pending):
            where, changes = unit
            trial = current.with_changes(with_unit(applied, changes))
            try:
                trial_case = cases.effective(trial)
            except InputError as exc:
                errors[where] = short(f"Not applied{_which(where, changes, exc)}: {exc}")
                continue
            applied = with_unit(applied, changes)
            view, case = trial, trial_case
            pending.remove(unit)
            errors.pop(where, None)
            progress = True
    selected = view.selected if inside(view.selected, case) else None
    view = replace(view, arcs=fit_arcs(view.arcs, case.max_revolutions), selected=selected)
    return view, case, errors


def _which(where: str, changes: dict[str, Any], exc: InputError) -> str:
    """When the case refuses a change because of another setting (a TOF minimum above the TOF
    maximum), say which change it was: `` (TOF min = 500)``."""
    if exc.field in changes:
        return ""
    control = CONTROL_BY_KEY.get(where)
    if control is not None:
        return f" ({control.label} = {changes[where]})"
    return " (" + ", ".join(f"{k.split('.', 1)[1]} = {v}" for k, v in changes.items()) + ")"


def _fired_keys(fired: Iterable[str]) -> list[str]:
    keys: list[str] = []
    for item in fired:
        slider = next((s for s in SLIDERS if s.url == item), None)
        if slider is not None:
            keys += [slider.start_key, slider.end_key]
        elif item in CONTROL_BY_KEY:
            keys.append(item)
    return keys


def inside(selected: tuple[str, str] | None, case: Case) -> bool:
    """Whether a selected cell lies within the case's windows (a minute's slack)."""
    if not selected:
        return False
    from solver.ephemeris.timescales import utc_to_jd_tdb

    try:
        dep = float(utc_to_jd_tdb(selected[0], field="sel"))
        arr = float(utc_to_jd_tdb(selected[1], field="sel"))
    except InputError:
        return False
    tol = MINUTE_DAYS
    return (
        case.departure_start_jd_tdb - tol <= dep <= case.departure_end_jd_tdb + tol
        and case.arrival_start_jd_tdb - tol <= arr <= case.arrival_end_jd_tdb + tol
    )


def errors_by_target(errors: dict[str, str]) -> tuple[dict[str, str], list[str]]:
    """Refused values by the control or slider they show on (url name), and the rest (for the
    message bar)."""
    shown: dict[str, str] = {}
    rest: list[str] = []
    for key, message in errors.items():
        target = error_target(key)
        if target is None:
            rest.append(message)
        elif target in shown:
            shown[target] += " " + message
        else:
            shown[target] = message
    return shown, rest


@dataclass(frozen=True)
class ViewInputs:
    """What the view callback received (component values, unpacked)."""

    trigger: str  # one of TRIGGERS
    search: str | None = None
    case_id: Any = None
    values: dict[str, Any] = field(default_factory=dict)
    fired: tuple[str, ...] = ()
    metric: Any = None
    arcs: Any = None
    click: Any = None


def plan_view(
    inputs: ViewInputs,
    current: ViewState | None,
    *,
    cases: Cases,
    from_link: Callable[[str | None], tuple[ViewState, Case, list[str]]],
    for_case: Callable[[str, str], tuple[ViewState, Case]],
    select: Callable[[ViewState, Case, Any, Any], ViewState],
) -> ViewPlan:
    """The next view of a tab.

    Parameters
    ----------
    inputs : ViewInputs
        What fired and the values the page sent.
    current : ViewState or None
        The tab's view (None on page load, or when the page's store held something refused).
    cases : Cases
        The catalogue.
    from_link, for_case, select : callables
        A view from a link query (with its notes), a fresh view of a case on a metric, and the
        view with the cell nearest a clicked point selected (``window_service``).
    """
    trigger = inputs.trigger
    if current is None or trigger == "page":
        view, case, notes = from_link(inputs.search)
        return ViewPlan(view, case, fill=True, errors={}, notes=[short(n) for n in notes])
    if trigger == "case":
        if not isinstance(inputs.case_id, str) or inputs.case_id == current.case:
            return ViewPlan()
        try:
            view, case = for_case(inputs.case_id, current.metric)
        except InputError as exc:
            return ViewPlan(notes=[short(str(exc))])
        return ViewPlan(view, case, fill=True, errors={}, notes=[])
    if trigger == "click":
        points = (inputs.click or {}).get("points") if isinstance(inputs.click, dict) else None
        if not points or not isinstance(points[0], dict):
            return ViewPlan()
        try:
            case = cases.effective(current)
            view = select(current, case, points[0].get("x"), points[0].get("y"))
        except (InputError, ValueError, TypeError) as exc:
            return ViewPlan(notes=[short(f"That point is not a cell of the map: {exc}")])
        return ViewPlan(view, case) if view != current else ViewPlan()
    if trigger == "metric":
        from .view_state import MAP_METRICS

        if inputs.metric not in MAP_METRICS or inputs.metric == current.metric:
            return ViewPlan()
        return ViewPlan(replace(current, metric=inputs.metric), cases.effective(current))
    if trigger == "arcs":
        case = cases.effective(current)
        if not isinstance(inputs.arcs, str) or inputs.arcs == current.arcs:
            return ViewPlan()
        if fit_arcs(inputs.arcs, case.max_revolutions) != inputs.arcs:
            return ViewPlan()
        return ViewPlan(replace(current, arcs=inputs.arcs), case)
    try:
        view, case, errors = apply_controls(cases, current, inputs.values, inputs.fired)
    except InputError as exc:  # the current view no longer builds (its case file changed)
        view, case, notes = from_link(None)
        return ViewPlan(view, case, fill=True, errors={}, notes=[short(str(exc)), *notes])
    return ViewPlan(view if view != current else None, case, errors=errors)


__all__ = [
    "MESSAGE_CHARS",
    "TRIGGERS",
    "ViewInputs",
    "ViewPlan",
    "apply_controls",
    "errors_by_target",
    "inside",
    "plan_view",
    "short",
]
