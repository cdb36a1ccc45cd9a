"""The selected arc's kilograms and launch minutes, as sections of the details panel.

From the solver's one-arc reports (``solver.window.arc_launch``: ``mass_budget``,
``vehicle_comparison``, ``arc_launch_window``, each read through ``as_dict()``, JSON-ready with
the units in its keys), written as labelled values with their units:

* **Mass budget**: the vehicle's capability and where its curve is read, the wet mass limit,
  the injected mass, each burn (who makes it, at what Isp, the propellant), the delivered mass,
  the margin, or why there is no mass;
* **Launch vehicles**: the same arc with each of the case's vehicles side by side;
* **Launch window**: the site's reach and each opening of the departure day's window (UTC),
  with what the model leaves out.

Also the short description of a case's mass and launch model under the vehicle picker.
"""

from __future__ import annotations

from typing import Any

from solver.launch.daily_window import LEFT_OUT
from solver.window.arc_launch import arc_launch_window, mass_budget, vehicle_comparison
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies
from solver.window.cell import Arc
from solver.window.mass import spacecraft_departs

from .detail_rows import DetailNotes, DetailRow, DetailTable, Section, fmt

HEADING_TEXT = {
    "toward": "toward the asymptote",
    "away": "away from the asymptote",
}
"""Which way round the parking orbit carries the spacecraft from the site to the asymptote
(``solver.launch.daily_window``)."""

KG_DIGITS = 1
"""Kilograms to a tenth, as the command line prints them."""


def _kg(value: float | None) -> str:
    return fmt(value, KG_DIGITS)


def _burn_text(burn: dict[str, Any]) -> str:
    """Who makes a burn, in words (``"main engine, Isp 321 s"``)."""
    made_by = burn["made_by"]
    if made_by == "no burn":
        return "no burn (Δv 0)"
    if made_by == "no propulsion system":
        return "no propulsion system makes it"
    if burn["isp_s"] is not None:
        return f"{made_by}, Isp {burn['isp_s']:g} s"
    return made_by


def mass_sections(case: Case, arc: Arc, bodies: CaseBodies) -> list[Section]:
    """The mass budget of ``arc`` and, with several vehicles, the vehicles compared (nothing
    when the case gives no spacecraft mass)."""
    if not case.mass.gives_mass or not arc.ok:
        return []
    budget = mass_budget(case, arc, bodies=bodies).as_dict()
    rows: list[DetailRow] = []
    if budget["vehicle"] is not None:
        rows += [
            DetailRow("launch vehicle", budget["vehicle"]),
            DetailRow("read at C3", fmt(budget["vehicle_c3_km2_s2"], 3), "km²/s²"),
            DetailRow("capability", _kg(budget["vehicle_capability_kg"]), "kg"),
        ]
    if budget["wet_mass_max_kg"] is not None:
        rows.append(DetailRow("wet mass limit", _kg(budget["wet_mass_max_kg"]), "kg"))
    rows.append(DetailRow("injected mass", _kg(budget["injected_mass_kg"]), "kg"))
    for burn in budget["burns"]:
        name = burn["burn"]
        rows.append(DetailRow(f"{name} burn", _burn_text(burn)))
        rows.append(DetailRow(f"{name} propellant", _kg(burn["propellant_kg"]), "kg"))
    rows.append(DetailRow("delivered mass", _kg(budget["delivered_mass_kg"]), "kg"))
    if budget["required_delivered_mass_kg"] is not None:
        rows.append(DetailRow("required", _kg(budget["required_delivered_mass_kg"]), "kg"))
        rows.append(DetailRow("margin", _kg(budget["mass_margin_kg"]), "kg"))
    if budget["reason"]:
        rows.append(DetailRow("no mass", budget["reason"]))
    sections: list[Section] = [("Mass budget", rows)]
    compared = [b.as_dict() for b in vehicle_comparison(case, arc, bodies)]
    if len(compared) > 1:
        table_rows = tuple(
            (b["vehicle"], _kg(b["injected_mass_kg"]), _kg(b["delivered_mass_kg"]))
            for b in compared
        )
        current = next(
            (k for k, b in enumerate(compared) if b["vehicle"] == budget["vehicle"]), None
        )
        notes = tuple(f"{b['vehicle']}: {b['reason']}" for b in compared if b["reason"])
        sections.append(
            (
                "Launch vehicles",
                DetailTable(
                    ("vehicle", "injected (kg)", "delivered (kg)"), table_rows, current, notes
                ),
            )
        )
    return sections


def _clock(utc: str, day: str) -> str:
    """A UTC time of a window on its day (``02:59:40``), the whole date when on another day."""
    date, _, time = utc.rstrip("Z").partition("T")
    return time if date == day else f"{date} {time}"


def _from_to(a: float | None, b: float | None, digits: int) -> str:
    if a is None or b is None:
        return "—"
    return f"{a:.{digits}f} → {b:.{digits}f}"


def launch_window_sections(case: Case, arc: Arc, bodies: CaseBodies) -> list[Section]:
    """The launch site's reach and the day's launch window for ``arc``'s asymptote (nothing
    when the case has no launch site)."""
    if case.launch_site is None or not arc.ok:
        return []
    report = arc_launch_window(case, arc, bodies).as_dict()
    site = report["site"]
    window = report["window"]
    low, high = report["reachable_inclinations_deg"]
    rows = [
        DetailRow("site", site["name"]),
        DetailRow("latitude", fmt(site["latitude_deg"], 2), "deg"),
        DetailRow("azimuths", f"{site['azimuth_min_deg']:g} to {site['azimuth_max_deg']:g}", "deg"),
        DetailRow("inclinations", f"{low:.2f} to {high:.2f}", "deg"),
        DetailRow("largest |DLA|", fmt(report["max_reachable_dla_deg"], 2), "deg"),
    ]
    if window is None:
        rows.append(DetailRow("window", f"none: {report['reason']}"))
        return [("Launch window", rows)]
    day = window["day_utc"]
    rows.append(DetailRow("DLA of date", fmt(window["declination_of_date_deg"], 3), "deg"))
    if not window["openings"]:
        why = (
            "the asymptote is beyond the site's reach"
            if not window["reachable"]
            else "no azimuth in the range reaches the asymptote's plane"
        )
        rows.append(DetailRow("window", f"none: {why}"))
    else:
        rows.append(DetailRow("open in all", fmt(window["total_minutes"], 1), "min"))
    sections: list[Section] = [(f"Launch window {day} (UTC)", rows)]
    parking = report["parking_altitude_km"]
    for k, opening in enumerate(window["openings"], start=1):
        # A window open when the day begins or ends is cut there: it goes on into the days
        # before and after, whose own asymptotes differ a little.
        start = "00:00:00" if opening["opens_at_day_start"] else _clock(opening["open_utc"], day)
        end = "24:00:00" if opening["closes_at_day_end"] else _clock(opening["close_utc"], day)
        rows = [
            DetailRow("opens", start, "UTC"),
            DetailRow("closes", end, "UTC"),
            DetailRow("lasts", fmt(opening["minutes"], 1), "min"),
            DetailRow(
                "azimuth",
                _from_to(opening["azimuth_open_deg"], opening["azimuth_close_deg"], 1),
                "deg",
            ),
            DetailRow(
                "inclination",
                _from_to(opening["inclination_open_deg"], opening["inclination_close_deg"], 2),
                "deg",
            ),
            DetailRow(
                "coast",
                _from_to(opening["coast_open_min"], opening["coast_close_min"], 1)
                if parking is not None
                else "none (no parking orbit)",
                "min" if parking is not None else "",
            ),
            DetailRow("heading", HEADING_TEXT.get(opening["direction"], opening["direction"])),
        ]
        sections.append((f"Opening {k} of {len(window['openings'])}", rows))
    sections.append(("", DetailNotes("What this launch window leaves out", LEFT_OUT)))
    return sections


def mass_summary(case: Case, bodies: CaseBodies) -> list[str]:
    """A few lines on the case's spacecraft, burns and launch site, for the vehicle picker."""
    model = case.mass
    lines: list[str] = []
    if not model.gives_mass:
        lines.append(
            "No spacecraft mass in this case: [[vehicles]] or [spacecraft] wet_mass_max_kg in "
            "the case file give one (and the mass metrics)."
        )
    else:
        parts = []
        if model.wet_mass_max_kg is not None:
            parts.append(f"wet mass at most {model.wet_mass_max_kg:,.0f} kg")
        if model.required_delivered_mass_kg is not None:
            parts.append(f"{model.required_delivered_mass_kg:,.0f} kg required in the final orbit")
        if parts:
            lines.append("Spacecraft: " + "; ".join(parts) + ".")
        burns = []
        for burn in ("departure", "arrival"):
            system = model.system(burn)
            if burn == "departure" and not spacecraft_departs(case, bodies):
                burns.append("departure by the launch vehicle")
            elif system is not None:
                burns.append(f"{burn} by {system.name} (Isp {system.isp_s:g} s)")
        if burns:
            lines.append("Burns: " + "; ".join(burns) + ".")
    site = case.launch_site
    if site is not None:
        lines.append(
            f"Launch site: {site.name}, latitude {site.latitude_deg:g}°, azimuths "
            f"{site.azimuth_min_deg:g}° to {site.azimuth_max_deg:g}° (|DLA| up to "
            f"{site.max_reachable_dla_deg:.1f}°)."
        )
    return lines


__all__ = ["launch_window_sections", "mass_sections", "mass_summary"]
