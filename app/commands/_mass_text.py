"""Plain-text lines for mass budgets and daily launch windows (shared by arc, best, period and
launch). They read the JSON-ready dicts of ``solver.window.arc_launch`` (``as_dict()``)."""

from __future__ import annotations

from typing import Any


def _kg(value: float | None) -> str:
    return "n/a" if value is None else f"{value:,.1f} kg"


def mass_lines(budget: dict[str, Any], vehicles: list[dict[str, Any]] | None = None) -> list[str]:
    """The mass budget of one arc, then the vehicles compared (when the case lists several)."""
    vehicle = budget["vehicle"] or "no launch vehicle"
    lines = [f"  mass budget ({vehicle}):"]
    if budget["vehicle"]:
        lines.append(
            f"    vehicle capability      {_kg(budget['vehicle_capability_kg'])} at C3 "
            f"{budget['vehicle_c3_km2_s2']:.3f} km2/s2 (after adapter and margin)"
        )
    if budget["wet_mass_max_kg"] is not None:
        lines.append(f"    wet mass limit          {_kg(budget['wet_mass_max_kg'])}")
    lines.append(f"    injected mass           {_kg(budget['injected_mass_kg'])}")
    for burn in budget["burns"]:
        isp = f", Isp {burn['isp_s']:g} s" if burn["isp_s"] is not None else ""
        dv = "n/a" if burn["dv_km_s"] is None else f"{burn['dv_km_s']:.4f} km/s"
        lines.append(
            f"    {burn['burn'] + ' burn':<23} {dv} by {burn['made_by']}{isp}: "
            f"propellant {_kg(burn['propellant_kg'])}"
        )
    lines.append(f"    delivered mass          {_kg(budget['delivered_mass_kg'])}")
    if budget["required_delivered_mass_kg"] is not None:
        lines.append(
            f"    margin                  {_kg(budget['mass_margin_kg'])} against the required "
            f"{_kg(budget['required_delivered_mass_kg'])}"
        )
    if budget["reason"]:
        lines.append(f"    no mass: {budget['reason']}")
    if vehicles and len(vehicles) > 1:
        lines.append("  vehicles compared (injected / delivered):")
        for other in vehicles:
            note = f"  ({other['reason']})" if other["reason"] else ""
            lines.append(
                f"    {other['vehicle']:<22} {_kg(other['injected_mass_kg']):>12} / "
                f"{_kg(other['delivered_mass_kg']):>12}{note}"
            )
    return lines


def window_lines(report: dict[str, Any], *, left_out: bool = True) -> list[str]:
    """A day's launch window: the site's reach, each opening, what is left out."""
    site = report["site"]
    if site is None or report["window"] is None:
        return [f"  launch window: none ({report['reason']})"]
    window = report["window"]
    low, high = report["reachable_inclinations_deg"]
    lines = [
        f"  launch site {site['name']}: latitude {site['latitude_deg']:g} deg, longitude "
        f"{site['longitude_deg']:g} deg, azimuths {site['azimuth_min_deg']:g} to "
        f"{site['azimuth_max_deg']:g} deg",
        f"    parking orbits reachable: inclination {low:.2f} to {high:.2f} deg, so asymptotes "
        f"with |DLA| <= {report['max_reachable_dla_deg']:.2f} deg",
        f"    asymptote: DLA {report['dla_deg']:.3f} deg, RLA {report['rla_deg']:.3f} deg (ICRF); "
        f"declination of date {window['declination_of_date_deg']:.3f} deg",
    ]
    parking = report["parking_altitude_km"]
    coast = (
        f"coast in the {parking:g} km parking orbit"
        if parking is not None
        else "no parking orbit in the case: no coast"
    )
    if not window["openings"]:
        why = (
            "the asymptote is beyond the site's reach"
            if not window["reachable"]
            else "no azimuth in the range reaches the asymptote's plane"
        )
        lines.append(f"  daily launch window {window['day_utc']} (UTC): none, {why}")
    else:
        lines.append(
            f"  daily launch window {window['day_utc']} (UTC): {len(window['openings'])} "
            f"opening(s), {window['total_minutes']:.1f} minutes in all; {coast}"
        )
        lines.append(
            f"    {'opens (UTC)':<22}{'closes (UTC)':<22}{'minutes':>8}  {'azimuth deg':<16}"
            f"{'inclination deg':<18}{'coast min':<16}direction"
        )
        for o in window["openings"]:
            coast_text = (
                "n/a"
                if o["coast_open_min"] is None
                else f"{o['coast_open_min']:.1f} -> {o['coast_close_min']:.1f}"
            )
            edge = " (from 00:00)" if o["opens_at_day_start"] else ""
            edge += " (to 24:00)" if o["closes_at_day_end"] else ""
            lines.append(
                f"    {o['open_utc']:<22}{o['close_utc']:<22}{o['minutes']:>8.1f}  "
                f"{o['azimuth_open_deg']:6.1f} -> {o['azimuth_close_deg']:<6.1f}"
                f"{o['inclination_open_deg']:6.2f} -> {o['inclination_close_deg']:<8.2f}"
                f"{coast_text:<16}{o['direction']} the asymptote{edge}"
            )
    if left_out:
        lines.append("    left out:")
        lines.extend(f"      - {item}" for item in report["left_out"])
    return lines
