"""The registry of bodies: name, GM, radius, sources with their valid dates, central body, pole.

One lookup, :meth:`BodyRegistry.get`, resolves a name case-insensitively (aliases included) and
lists the known names when it fails. Registries are immutable: a case adds its own element bodies
with :meth:`BodyRegistry.with_bodies`, which returns a new registry and leaves the built-in one
untouched, so two cases (or two dashboard sessions) never see each other's bodies.

Poles: IAU WGCCRE north-pole right ascension and declination at J2000.0 in ICRF, deg. Rates and
periodic terms are dropped (they move the poles by at most ~0.1 deg per century, the Moon's and
Neptune's periodic terms by up to a few degrees); the pole here only defines planet-equator
frames for "prograde" and inclinations of planet-centred orbits.
[SECONDARY: IAU WGCCRE 2009/2015 values as transcribed in several unrelated public code bases,
which agree; Mars uses the 2009 secular model, whose J2000 pole agrees with the 2015 model
including its periodic terms to 0.001 deg; Neptune's is evaluated at J2000 with its N term.]
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Iterator
from dataclasses import dataclass
from typing import NamedTuple

from solver import constants as c
from solver.ephemeris import de as ephem_de
from solver.ephemeris import mean_elements as ephem_mean
from solver.ephemeris.element_bodies import ElementBody, ElementSet, frame_text
from solver.errors import InputError

DE423 = ephem_de.DE_NAME
MEAN = ephem_mean.SOURCE_NAME
ELEMENTS = "elements"
ELEMENT_JD_TDB_MIN = 2086302.5
"""1000-01-01 TDB (proleptic Gregorian, ``erfa.cal2jd``): the first date of element bodies."""
ELEMENT_JD_TDB_MAX = 2816787.5
"""3000-01-01 TDB: the last date of element bodies. Two-body motion is exact at any date, but
dates must stay where the time-scale conversions and the date axes of plots and files work
(year 1 already prints as year 0 in UTC), so element bodies get this range of their own, as
the ephemerides have theirs; a case's windows and an element epoch are checked against it."""
SOURCES: tuple[str, ...] = (DE423, MEAN)
"""Sources a caller may choose for the built-in planets (``source=`` of
:func:`solver.ephemeris.states.states`)."""


class SourceRange(NamedTuple):
    """One source of a body's states, the dates it covers (JD TDB) and its accuracy."""

    source: str
    jd_tdb_min: float
    jd_tdb_max: float
    accuracy: str


@dataclass(frozen=True)
class Body:
    """One entry of the registry.

    Attributes
    ----------
    name : str
        Canonical name (built-ins lower case; element bodies as written).
    gm_km3_s2 : float
        GM, km^3/s^2 (system GM for Mars-Pluto; NaN when unknown).
    radius_km : float
        Equatorial radius, km (NaN when unknown).
    central_body : str or None
        The body it orbits (lower case); None for the solar-system barycentre.
    sources : tuple of SourceRange
        Available sources, the default first.
    pole_ra_deg, pole_dec_deg : float
        North pole in ICRF, deg (NaN when not defined).
    aliases : tuple of str
        Other accepted names (lower case).
    note : str
        What the name stands for, when it needs saying.
    elements : ElementBody or None
        The orbit, for element bodies.
    """

    name: str
    gm_km3_s2: float
    radius_km: float
    central_body: str | None
    sources: tuple[SourceRange, ...]
    pole_ra_deg: float = math.nan
    pole_dec_deg: float = math.nan
    aliases: tuple[str, ...] = ()
    note: str = ""
    elements: ElementBody | None = None

    @property
    def key(self) -> str:
        return self.name.lower()

    @property
    def default_source(self) -> str:
        return self.sources[0].source

    def source_range(self, source: str) -> SourceRange | None:
        for entry in self.sources:
            if entry.source == source:
                return entry
        return None


_DE_ACCURACY = (
    "JPL DE423 integrated ephemeris (Folkner 2010); far below the km level for the planets over "
    "the observed era (from memory)"
)


def _de(note: str = "") -> SourceRange:
    return SourceRange(DE423, ephem_de.JD_TDB_MIN, ephem_de.JD_TDB_MAX, note or _DE_ACCURACY)


def _mean(key: str) -> SourceRange:
    bound = ephem_mean.ERROR_BOUNDS[key]
    text = (
        f"Standish Table 1 nominal errors: {bound.longitude_arcsec:g} arcsec longitude, "
        f"{bound.latitude_arcsec:g} arcsec latitude, {bound.distance_km / 1000:g} thousand km"
    )
    return SourceRange(MEAN, ephem_mean.JD_TDB_MIN, ephem_mean.JD_TDB_MAX, text)


_MEAN_SUN = SourceRange(
    MEAN, ephem_mean.JD_TDB_MIN, ephem_mean.JD_TDB_MAX, "origin of the mean-element source"
)


def _builtin_bodies() -> list[Body]:
    nan = math.nan
    system = "system barycentre (planet and moons), as integrated in the DE file"
    return [
        Body("ssb", nan, nan, None, (_de("origin of DE423"),),
             aliases=("solar system barycenter", "solar system barycentre"),
             note="solar-system barycentre"),
        Body("sun", c.GM_SUN_KM3_S2, c.RADIUS_SUN_KM, "ssb", (_de(), _MEAN_SUN),
             286.13, 63.87),
        Body("mercury", c.GM_MERCURY_KM3_S2, c.RADIUS_MERCURY_KM, "sun",
             (_de(), _mean("mercury")), 281.0103, 61.4155),
        Body("venus", c.GM_VENUS_KM3_S2, c.RADIUS_VENUS_KM, "sun",
             (_de(), _mean("venus")), 272.76, 67.16),
        Body("emb", c.GM_EARTH_MOON_KM3_S2, nan, "sun", (_de(), _mean("emb")),
             aliases=("earth-moon barycenter", "earth-moon barycentre", "em bary"),
             note="Earth-Moon barycentre"),
        Body("earth", c.GM_EARTH_KM3_S2, c.RADIUS_EARTH_KM, "sun",
             (_de(), _mean("emb")), 0.0, 90.0,
             note="from DE423: EMB - Moon/(1+EMRAT); from 'mean': the EMB (within 4700 km)"),
        Body("moon", c.GM_MOON_KM3_S2, c.RADIUS_MOON_KM, "earth", (_de(),), 269.9949, 66.5392,
             aliases=("luna",), note="pole without its periodic terms (+-4 deg RA, +-1.5 deg Dec)"),
        Body("mars", c.GM_MARS_SYSTEM_KM3_S2, c.RADIUS_MARS_KM, "sun",
             (_de(), _mean("mars")), 317.68143, 52.88650, note=system),
        Body("jupiter", c.GM_JUPITER_SYSTEM_KM3_S2, c.RADIUS_JUPITER_KM, "sun",
             (_de(), _mean("jupiter")), 268.056595, 64.495303, note=system),
        Body("saturn", c.GM_SATURN_SYSTEM_KM3_S2, c.RADIUS_SATURN_KM, "sun",
             (_de(), _mean("saturn")), 40.589, 83.537, note=system),
        Body("uranus", c.GM_URANUS_SYSTEM_KM3_S2, c.RADIUS_URANUS_KM, "sun",
             (_de(), _mean("uranus")), 257.311, -15.175, note=system),
        Body("neptune", c.GM_NEPTUNE_SYSTEM_KM3_S2, c.RADIUS_NEPTUNE_KM, "sun",
             (_de(), _mean("neptune")), 299.334, 42.950, note=system),
        Body("pluto", c.GM_PLUTO_SYSTEM_KM3_S2, c.RADIUS_PLUTO_KM, "sun",
             (_de(), _mean("pluto")), 132.993, -6.163,
             note="Pluto-Charon barycentre, as integrated in the DE file"),
    ]  # fmt: skip


def has_mass(body: Body) -> bool:
    """Whether a body has a known GM and radius: it can be launched from, orbited or entered."""
    return math.isfinite(body.gm_km3_s2) and body.gm_km3_s2 > 0 and math.isfinite(body.radius_km)


def body_from_elements(elements: ElementBody) -> Body:
    """Registry entry for an element body (two-body motion, from 1000 to 3000 TDB)."""
    return Body(
        name=elements.name,
        gm_km3_s2=elements.gm_km3_s2,
        radius_km=elements.radius_km,
        central_body=elements.central_body,
        sources=(
            SourceRange(
                ELEMENTS,
                ELEMENT_JD_TDB_MIN,
                ELEMENT_JD_TDB_MAX,
                "two-body orbit from its elements (exact Kepler)",
            ),
        ),
        note=f"elements in the {frame_text(elements.frame)}",
        elements=elements,
    )


class BodyRegistry:
    """Immutable set of bodies with case-insensitive lookup by name or alias."""

    def __init__(self, bodies: Iterable[Body]) -> None:
        self._bodies: dict[str, Body] = {}
        self._lookup: dict[str, str] = {}
        for body in bodies:
            for label in (body.key, *body.aliases):
                if label in self._lookup:
                    raise InputError("name", body.name, "a name not already in the registry")
                self._lookup[label] = body.key
            self._bodies[body.key] = body

    def __iter__(self) -> Iterator[Body]:
        return iter(self._bodies.values())

    def __len__(self) -> int:
        return len(self._bodies)

    def __contains__(self, name: object) -> bool:
        return isinstance(name, str) and name.strip().lower() in self._lookup

    def names(self) -> tuple[str, ...]:
        """Canonical names, in registry order."""
        return tuple(b.name for b in self._bodies.values())

    def get(self, name: str, field: str = "body") -> Body:
        """The body called ``name`` (case-insensitive, aliases accepted).

        Raises
        ------
        InputError
            Unknown name; the message lists the known names (the first 40 of a long list).
        """
        key = name.strip().lower() if isinstance(name, str) else None
        if key is not None and key in self._lookup:
            return self._bodies[self._lookup[key]]
        names = self.names()
        shown = ", ".join(names[:40])
        if len(names) > 40:
            shown += f", ... ({len(names) - 40} more)"
        raise InputError(field, name, f"a known body: {shown}")

    def with_bodies(self, *items: ElementBody | ElementSet | Body | Iterable) -> BodyRegistry:
        """A new registry holding these bodies as well; this one is not changed.

        Parameters
        ----------
        *items : ElementBody, ElementSet, Body, or iterables of them
            Names must not clash with existing names or aliases; an element body's central body
            must be in the registry (or among the bodies added before it).
        """
        added: list[Body] = []

        def collect(item: object) -> None:
            if isinstance(item, Body):
                added.append(item)
            elif isinstance(item, ElementBody):
                added.append(body_from_elements(item))
            elif not isinstance(item, (str, bytes)) and hasattr(item, "__iter__"):
                for sub in item:
                    collect(sub)
            else:
                shown = item if isinstance(item, str) else type(item).__name__
                raise InputError("bodies", shown, "ElementBody, ElementSet or Body")

        for item in items:
            collect(item)
        new = BodyRegistry([*self._bodies.values(), *added])
        for body in added:
            if body.central_body is not None:
                new.get(body.central_body, field=f"{body.name}: central_body")
        return new


_DEFAULT: BodyRegistry | None = None


def default_registry() -> BodyRegistry:
    """The built-in registry: Sun, planets (system barycentres for Mars-Pluto), Moon, EMB, SSB."""
    global _DEFAULT
    if _DEFAULT is None:
        _DEFAULT = BodyRegistry(_builtin_bodies())
    return _DEFAULT


__all__ = [
    "DE423",
    "ELEMENTS",
    "ELEMENT_JD_TDB_MAX",
    "ELEMENT_JD_TDB_MIN",
    "MEAN",
    "SOURCES",
    "Body",
    "BodyRegistry",
    "SourceRange",
    "body_from_elements",
    "default_registry",
    "has_mass",
]
