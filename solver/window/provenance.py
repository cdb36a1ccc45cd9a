"""Where every output's numbers come from: provenance, case hash and the grid cache key."""

from __future__ import annotations

import datetime as _dt
from typing import Any

from solver import ENGINE_VERSION
from solver.caution import CAUTION
from solver.digest import cache_key
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies
from solver.window.mass import mass_notes
from solver.window.metrics import dv_conventions
from solver.window.outputs import case_outputs


def ephemeris_label(case: Case) -> str:
    """Where the states of the case's bodies come from: an ephemeris, their own elements, or
    both. A transfer between bodies given by elements about the same central body reads no
    ephemeris at all, and says so."""
    registry = case.registry()

    def root(name: str):
        body = registry.get(name)
        while body.elements is not None:
            body = registry.get(body.elements.central_body)
        return body

    element_bodies = [
        registry.get(name).name
        for name in (case.departure_body, case.target_body)
        if registry.get(name).elements is not None
    ]
    bases = {root(name).key for name in (case.departure_body, case.target_body)}
    reads_ephemeris = bases != {root(case.central_body).key} or len(element_bodies) < 2
    if case.ephemeris_source == "mean":
        table = "JPL approximate mean elements (Standish, Table 1, 1800-2050)"
    else:
        table = "JPL DE423 (jplephem, de423 package)"
    elements = (
        "two-body motion from the case's elements (" + ", ".join(element_bodies) + ")"
        if element_bodies
        else ""
    )
    if not reads_ephemeris:
        return f"no ephemeris file: {elements}"
    return f"{table}; {elements}" if elements else table


def case_hash(case: Case) -> str:
    return cache_key({"case": case.normalized()})[:16]


def window_cache_key(case: Case) -> str:
    return cache_key(
        {
            "case": case.normalized(),
            "ephemeris": ephemeris_label(case),
            "engine": ENGINE_VERSION,
            "grid_format": 1,
        }
    )


def provenance(case: Case) -> dict[str, Any]:
    """What every output states about where its numbers come from."""
    bodies = CaseBodies.of(case)
    return {
        "case_title": case.title,
        "case_hash": case_hash(case),
        "ephemeris": ephemeris_label(case),
        "constants": "GM from the DE423 header; radii JPL SSD / IAU 2015 (solver/constants.py)",
        "engine": f"arcwindow {ENGINE_VERSION}",
        "lambert_method": "Izzo (2015) with Householder iterations",
        "frame": (
            "ICRF (equatorial J2000); DLA/RLA and arrival asymptote angles in ICRF"
            if case_outputs(case).launch
            else "ICRF (equatorial J2000); burn directions along the radial, along-track and "
            "cross-track axes of the departure body's and the target's orbits"
        ),
        "time_scales": "dates shown in UTC; computed in TDB",
        **dv_conventions(case, bodies),
        **mass_notes(case, bodies),
        **_site(case),
        "computed_utc": _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "caution": CAUTION,
    }


def _site(case: Case) -> dict[str, str]:
    site = case.launch_site
    if site is None:
        return {}
    low, high = site.reachable_inclinations_deg
    return {
        "launch_site": f"{site.name}: latitude {site.latitude_deg:g} deg, azimuths "
        f"{site.azimuth_min_deg:g} to {site.azimuth_max_deg:g} deg, parking orbits {low:.2f} to "
        f"{high:.2f} deg inclination, |DLA| up to {site.max_reachable_dla_deg:.2f} deg"
    }


__all__ = ["case_hash", "ephemeris_label", "provenance", "window_cache_key"]
