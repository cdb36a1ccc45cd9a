"""The window page's case controls, made from the one table of case settings.

Every setting of ``solver.window.settings.SETTINGS`` whose ``control`` is ``"number"`` or
``"dropdown"`` gets a control here: its id (``input-<url name>`` or ``dropdown-<url name>``), its
label and unit, the panel it sits in (by the setting's section), how a value typed into it is
read, and how a refused value is shown on it. The link carries it under its ``url`` name
(``view_state.FIELDS``). So a new scalar setting is one entry in ``SETTINGS``; the two date
windows are range sliders, a pair of settings each (:data:`SLIDERS`).

Plain data and small layout helpers; reading a value is checked against the setting's own kind
and bounds (``Setting.check``), so a refused value is named with the same words as in a case
file.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from dash import dcc, html

from solver.errors import InputError
from solver.window.outputs import launch_setting_keys
from solver.window.settings import SETTINGS, Setting

PANELS = {
    "case": "bodies",
    "window": "dates",
    "transfer": "map",
    "departure_orbit": "orbits",
    "arrival_orbit": "orbits",
    "limits": "limits",
    "spacecraft": "mass",
}
"""The panel of the page each section's controls sit in."""

CHOICE_TEXT = {
    "capture": "capture into orbit",
    "flyby": "flyby (no burn)",
    "rendezvous": "rendezvous (match velocity)",
}
"""Longer words for some choices in dropdowns (a choice without one shows as written)."""

EMPTY_OPTIONS_TEXT = {"spacecraft.vehicle": "the case lists no launch vehicle"}
"""What a dropdown of a case's own names says when the case has none."""


@dataclass(frozen=True)
class Control:
    """One case setting's control on the page."""

    setting: Setting
    widget: str  # "number" or "dropdown"

    @property
    def key(self) -> str:
        return self.setting.key

    @property
    def id(self) -> str:
        prefix = "dropdown" if self.widget == "dropdown" else "input"
        return f"{prefix}-{self.setting.url}"

    @property
    def error_id(self) -> str:
        return f"text-error-{self.setting.url}"

    @property
    def panel(self) -> str:
        return PANELS.get(self.setting.section, "orbits")

    @property
    def label(self) -> str:
        return self.setting.label

    @property
    def optional(self) -> bool:
        return self.setting.default is None and not self.setting.required

    def read(self, raw: Any) -> Any:
        """The value a control holds, checked alone (kind and bounds); None clears an optional
        setting. InputError names the setting, the value and what is accepted."""
        s = self.setting
        if raw is None or (isinstance(raw, str) and not raw.strip()):
            if self.optional:
                return None
            raise InputError(s.key, "(empty)", s.accepted)
        if s.kind in ("number", "integer") and isinstance(raw, str):
            try:
                raw = float(raw.replace("−", "-"))
            except ValueError:
                raise InputError(s.key, raw[:40], s.accepted) from None
        if s.kind == "integer" and isinstance(raw, float) and raw.is_integer():
            raw = int(raw)
        if isinstance(raw, float) and not math.isfinite(raw):
            raise InputError(s.key, raw, s.accepted)
        if s.kind == "body":
            if not isinstance(raw, str) or not 0 < len(raw.strip()) <= 80:
                raise InputError(s.key, str(raw)[:40], s.accepted)
            return raw.strip()
        return s.check(raw)


CONTROLS: tuple[Control, ...] = tuple(
    Control(s, s.control) for s in SETTINGS if s.control in ("number", "dropdown") and s.url
)
CONTROL_BY_KEY: dict[str, Control] = {c.key: c for c in CONTROLS}
CONTROL_IDS: dict[str, str] = {c.key: c.id for c in CONTROLS}
LAUNCH_FIELD_KEYS: tuple[str, ...] = tuple(k for k in launch_setting_keys() if k in CONTROL_BY_KEY)
"""Controls that fit only a launch (C3 max, |DLA| max, launch vehicle), hidden for a satellite
case."""
"""Control ids by the dotted case key they change."""


@dataclass(frozen=True)
class Slider:
    """A date window: one range slider for a pair of settings."""

    url: str
    start_key: str
    end_key: str
    label: str

    @property
    def id(self) -> str:
        return f"slider-{self.label.split()[0]}-range"

    @property
    def text_id(self) -> str:
        return f"text-{self.label.split()[0]}-range"

    @property
    def error_id(self) -> str:
        return f"text-error-{self.url}"


def _sliders() -> tuple[Slider, ...]:
    ranges = [s for s in SETTINGS if s.control == "range"]
    out = []
    for start in (s for s in ranges if s.key.endswith("_start")):
        stem = start.key[: -len("_start")]
        end = next(s for s in ranges if s.key == stem + "_end")
        word = stem.split(".", 1)[1]  # departure, arrival
        out.append(Slider(word[:3], start.key, end.key, f"{word} window"))
    return tuple(out)


SLIDERS: tuple[Slider, ...] = _sliders()
SLIDER_BY_URL = {s.url: s for s in SLIDERS}
SLIDER_IDS = {s.url: s.id for s in SLIDERS}


def error_target(key: str) -> str | None:
    """The url name of the control or slider where a refused setting's message shows."""
    if key in CONTROL_BY_KEY:
        return CONTROL_BY_KEY[key].setting.url
    for slider in SLIDERS:
        if key in (slider.start_key, slider.end_key):
            return slider.url
    return None


ERROR_TARGETS: tuple[str, ...] = tuple(c.setting.url for c in CONTROLS if c.setting.url) + tuple(
    s.url for s in SLIDERS
)
"""Every place a refused value can be shown, by url name."""


# ---------------------------------------------------------------------------------------------
# Layout helpers


def label(text: str, unit: str = "", for_id: str | None = None, label_id: str | None = None):
    children: list = [text]
    if unit:
        children.append(html.Span(f" ({unit})", className="aw-unit"))
    kwargs = {"id": label_id} if label_id else {}
    return html.Label(children, htmlFor=for_id, className="aw-label", **kwargs)


def error_text(url: str) -> html.Div:
    return html.Div(id=f"text-error-{url}", className="aw-field-error", role="alert")


def control_field(control: Control) -> html.Div:
    """Label, widget and the place its refused value's message shows."""
    s = control.setting
    label_id = f"label-{s.url}"
    if control.widget == "dropdown":
        # A choice lists its values; a name (a body, a launch vehicle) gets the case's own
        # names as options when the page shows a case.
        options = [{"value": c, "label": CHOICE_TEXT.get(c, c)} for c in s.choices]
        widget = dcc.Dropdown(
            id=control.id,
            options=options,
            # a choice is always one of its options (an optional one falls back to the case
            # file's default when the link leaves it out)
            clearable=False,
            className="aw-dropdown",
            placeholder=EMPTY_OPTIONS_TEXT.get(s.key, "none"),
        )
    else:
        widget = dcc.Input(
            id=control.id,
            type="number",
            debounce=True,
            placeholder="none" if control.optional else "",
            className="aw-input",
            step="any",
        )
    return html.Div(
        [label(s.label, s.unit, control.id, label_id), widget, error_text(s.url)],
        id=f"field-{s.url}",
        className="aw-field",
        **{"data-setting": s.key},
    )


def launch_fields(launch_limits: bool, central: str) -> tuple[dict[str, dict], str]:
    """Which launch-only controls a case shows, and why the others are not offered.

    Parameters
    ----------
    launch_limits : bool
        ``CaseOutputs.launch_limits`` of the case (a launch from a planet about the Sun).
    central : str
        The case's central body, as shown.

    Returns
    -------
    styles : dict
        The style of each launch-only control's field (:data:`LAUNCH_FIELD_KEYS`), by key.
    hint : str
        One line saying why they are hidden ("" when they are shown).
    """
    shown = {} if launch_limits else {"display": "none"}
    styles = {key: shown for key in LAUNCH_FIELD_KEYS}
    if launch_limits:
        return styles, ""
    labels = [CONTROL_BY_KEY[key].label for key in LAUNCH_FIELD_KEYS]
    names = ", ".join(labels[:-1]) + " and " + labels[-1] if len(labels) > 1 else labels[0]
    hint = (
        f"{names} are not offered: this transfer is about {central}, between bodies in orbit "
        "about it, so no launch vehicle leaves the departure body."
    )
    return styles, hint


def controls_of(panel: str) -> list[Control]:
    return [c for c in CONTROLS if c.panel == panel]


__all__ = [
    "CHOICE_TEXT",
    "CONTROLS",
    "CONTROL_BY_KEY",
    "CONTROL_IDS",
    "EMPTY_OPTIONS_TEXT",
    "ERROR_TARGETS",
    "LAUNCH_FIELD_KEYS",
    "PANELS",
    "SLIDERS",
    "SLIDER_BY_URL",
    "SLIDER_IDS",
    "Control",
    "Slider",
    "control_field",
    "controls_of",
    "error_target",
    "error_text",
    "label",
    "launch_fields",
]
