"""Where the bodies are: one interface for states of any registered body about any other.

    r_km, v_km_s = states("mars", jd_tdb, central="sun", frame="icrf")

Sources (see docs/engine.md, "Ephemerides, time scales and frames"):

* ``"de423"`` (default for the Sun, planets, Moon, EMB, SSB): JPL DE423, 1799-12-16 to 2200-02-01,
  barycentric, ICRF (``solver.ephemeris.de``). Mars-Pluto are system barycentres.
* ``"mean"``: JPL's table of approximate mean elements (Standish, Table 1), 1800-2050, heliocentric
  ecliptic J2000, with the table's stated accuracy (``solver.ephemeris.mean_elements``).
  Faster to explain than to beat; kept as a cross-check and fallback. It has no Moon and no
  barycentre.
* element bodies: two-body orbits from elements at an epoch
  (``solver.ephemeris.element_bodies``), about any registered central body; added to a
  registry with ``BodyRegistry.with_bodies``.

States of a body about a central body are built by walking both up to a common origin (the
solar-system barycentre for DE423, the Sun for the mean elements), so a body's state about its
own central body never passes through large barycentric numbers.

Shapes: ``jd_tdb`` of shape S gives ``r_km`` and ``v_km_s`` of shape S + (3,): a scalar epoch
gives (3,), a 1-D array (n, 3), a 2-D grid (n, m, 3).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from solver.ephemeris import de as ephem_de
from solver.ephemeris import mean_elements as ephem_mean
from solver.ephemeris.bodies import DE423, ELEMENTS, SOURCES, Body, BodyRegistry, default_registry
from solver.ephemeris.element_bodies import ElementSet
from solver.ephemeris.frames import (
    ICRF,
    ICRF_TO_ECLIPTIC,
    Frame,
    check_frame,
    equator_frame,
    rotate,
)
from solver.errors import InputError

OUT_OF_RANGE_MODES = ("raise", "nan")
EQUATOR = "equator"

State = tuple[NDArray[np.float64], NDArray[np.float64]]


def _jd_label(jd: float) -> str:
    from solver.ephemeris.timescales import jd_tdb_to_utc

    try:
        return f"{jd_tdb_to_utc(jd, digits=0)} (JD TDB {jd:.6f})"
    except InputError:
        return f"JD TDB {jd!r}"


def _range_text(entry) -> str:
    from solver.ephemeris.timescales import jd_tdb_to_iso_tdb

    lo = jd_tdb_to_iso_tdb(entry.jd_tdb_min, digits=0)[:10]
    hi = jd_tdb_to_iso_tdb(entry.jd_tdb_max, digits=0)[:10]
    return f"{lo} to {hi} TDB (JD {entry.jd_tdb_min} to {entry.jd_tdb_max})"


class _Context:
    """One request: the registry, the source choice, the epochs and what to do out of range."""

    def __init__(self, registry: BodyRegistry, source: str | None, jd, field: str, mode: str):
        self.registry = registry
        self.source = source
        self.jd = jd
        self.field = field
        self.mode = mode
        self.bad = np.zeros(jd.shape, dtype=bool)

    def source_for(self, body: Body) -> str:
        if body.elements is not None:
            return ELEMENTS
        if self.source is None:
            return body.default_source
        if body.source_range(self.source) is None:
            offered = ", ".join(s.source for s in body.sources)
            raise InputError("source", self.source, f"a source offering {body.name}: {offered}")
        return self.source

    def check_range(self, body: Body, source: str) -> None:
        entry = body.source_range(source)
        if entry is None:  # pragma: no cover - source_for guarantees it
            raise InputError("source", source, "a source of " + body.name)
        outside = ~((self.jd >= entry.jd_tdb_min) & (self.jd <= entry.jd_tdb_max))
        if not outside.any():
            return
        if self.mode == "raise":
            first = float(np.asarray(self.jd)[outside].reshape(-1)[0])
            raise InputError(
                self.field,
                _jd_label(first),
                f"a date within {_range_text(entry)}, the {source} range for {body.name}",
            )
        self.bad |= outside


def _chain(body: Body, ctx: _Context) -> list[Body]:
    """The body, then its element-body centrals up to the first body read from an ephemeris."""
    chain = [body]
    seen = {body.key}
    while chain[-1].elements is not None:
        central = ctx.registry.get(chain[-1].elements.central_body, field="central_body")
        if central.key in seen:
            raise InputError("central_body", central.name, "a chain of centrals without a loop")
        seen.add(central.key)
        chain.append(central)
    return chain


def _element_state_icrf(body: Body, ctx: _Context) -> State:
    """State of an element body about its own central body, ICRF."""
    elements = ElementSet([body.elements])  # type: ignore[list-item]
    r, v = elements.states_about_central(ctx.jd)
    return r[0], v[0]


def _ephemeris_state(body: Body, ctx: _Context) -> State:
    """State of a built-in body about the source's origin (SSB or Sun), ICRF."""
    source = ctx.source_for(body)
    ctx.check_range(body, source)
    if source == DE423:
        if body.key == "ssb":
            zero = np.zeros((*ctx.jd.shape, 3))
            return zero, zero.copy()
        return ephem_de.barycentric_state(body.key, ctx.jd)
    if body.key == "sun":
        zero = np.zeros((*ctx.jd.shape, 3))
        return zero, zero.copy()
    r_ecl, v_ecl = ephem_mean.heliocentric_ecliptic_state(body.key, ctx.jd)
    return r_ecl @ ICRF_TO_ECLIPTIC, v_ecl @ ICRF_TO_ECLIPTIC  # ecliptic -> ICRF


def _state_along(chain: list[Body], stop: int, ctx: _Context) -> State:
    """State of chain[0] about chain[stop]: the sum of the element states chain[0:stop]."""
    r = np.zeros((*ctx.jd.shape, 3))
    v = np.zeros((*ctx.jd.shape, 3))
    for body in chain[:stop]:
        dr, dv = _element_state_icrf(body, ctx)
        r += dr
        v += dv
    return r, v


def _relative_state(target: Body, center: Body, ctx: _Context) -> State:
    t_chain = _chain(target, ctx)
    c_chain = _chain(center, ctx)
    t_keys = [b.key for b in t_chain]
    c_keys = [b.key for b in c_chain]
    # Shortcut: one chain passes through the other's start (e.g. an orbiter about its planet).
    if center.key in t_keys:
        return _state_along(t_chain, t_keys.index(center.key), ctx)
    if target.key in c_keys:
        r, v = _state_along(c_chain, c_keys.index(target.key), ctx)
        return -r, -v
    r_t, v_t = _state_along(t_chain, len(t_chain) - 1, ctx)
    r_c, v_c = _state_along(c_chain, len(c_chain) - 1, ctx)
    base_t, base_c = t_chain[-1], c_chain[-1]
    if base_t.key != base_c.key:
        rb_t, vb_t = _ephemeris_state(base_t, ctx)
        rb_c, vb_c = _ephemeris_state(base_c, ctx)
        r_t, v_t = r_t + rb_t, v_t + vb_t
        r_c, v_c = r_c + rb_c, v_c + vb_c
    return r_t - r_c, v_t - v_c


def _output_frame(frame: Frame, center: Body) -> Frame:
    if isinstance(frame, str) and frame.strip().lower() == EQUATOR:
        if not np.isfinite(center.pole_ra_deg):
            raise InputError("frame", frame, f"'icrf' or 'ecliptic' ({center.name} has no pole)")
        return equator_frame(center.pole_ra_deg, center.pole_dec_deg, f"{center.name} equator")
    return frame


def states(
    body: str,
    jd_tdb: ArrayLike,
    central: str = "sun",
    frame: Frame = ICRF,
    *,
    source: str | None = None,
    registry: BodyRegistry | None = None,
    out_of_range: str = "raise",
    field: str = "jd_tdb",
) -> State:
    """Position and velocity of ``body`` relative to ``central`` at TDB epochs.

    Parameters
    ----------
    body, central : str
        Registered names, case-insensitive (``arcwindow bodies`` lists them): ``"sun"``,
        ``"mercury"`` ... ``"pluto"``, ``"earth"``, ``"moon"``, ``"emb"``, ``"ssb"`` and any
        element body of ``registry``. Mars-Pluto are system barycentres in DE423.
    jd_tdb : array_like, shape S
        Epochs, Julian date TDB (float64; see ``solver.ephemeris.timescales`` for the ~20 us
        resolution).
    frame : {"icrf", "ecliptic", "equator"} or EquatorFrame
        Axes of the result: ICRF (equatorial J2000, the DE frame; DLA/RLA live here), ecliptic
        J2000, or the central body's equator (from its IAU pole).
    source : {None, "de423", "mean"}
        Ephemeris for the built-in bodies; None takes each body's default (DE423). Element bodies
        always move on their own elements; their central bodies follow ``source``.
    registry : BodyRegistry, optional
        Bodies to look names up in (default: the built-in registry).
    out_of_range : {"raise", "nan"}
        Epochs outside a source's dates: raise :class:`InputError` naming the first one and the
        valid range, or return NaN rows for them (grids keep their other cells).
    field : str
        Name of the epoch field in error messages.

    Returns
    -------
    r_km : ndarray, shape S + (3,)
        Position, km.
    v_km_s : ndarray, shape S + (3,)
        Velocity, km/s.

    Examples
    --------
    >>> import numpy as np
    >>> r, v = states("earth", 2451545.0)
    >>> r.shape, round(float(np.linalg.norm(r)) / 1.496e8, 3)
    ((3,), 0.983)
    """
    reg = registry if registry is not None else default_registry()
    if out_of_range not in OUT_OF_RANGE_MODES:
        raise InputError("out_of_range", out_of_range, "'raise' or 'nan'")
    src = None if source is None else str(source).strip().lower()
    if src is not None and src not in SOURCES:
        raise InputError("source", source, "'de423' or 'mean'")
    target = reg.get(body, field="body")
    center = reg.get(central, field="central")
    out_frame = check_frame(_output_frame(frame, center))
    jd = np.asarray(jd_tdb, dtype=float)
    if not np.all(np.isfinite(jd)):
        if out_of_range == "raise":
            raise InputError(field, "NaN or infinite epoch", "finite JD TDB values")
    ctx = _Context(reg, src, jd, field, out_of_range)
    with np.errstate(invalid="ignore"):
        r, v = _relative_state(target, center, ctx)
    bad = ctx.bad | ~np.isfinite(jd)
    if bad.any():
        r = np.where(bad[..., None], np.nan, r)
        v = np.where(bad[..., None], np.nan, v)
    if not (isinstance(out_frame, str) and out_frame.strip().lower() == ICRF):
        r = rotate(r, ICRF, out_frame)
        v = rotate(v, ICRF, out_frame)
    return r, v


def element_set_states(
    element_set: ElementSet,
    jd_tdb: ArrayLike,
    central: str | None = None,
    frame: Frame = ICRF,
    *,
    per_body: bool = False,
    source: str | None = None,
    registry: BodyRegistry | None = None,
    out_of_range: str = "raise",
) -> State:
    """States of many element bodies at many epochs in one vectorized call.

    Parameters
    ----------
    element_set : ElementSet
        The bodies (e.g. from ``read_element_csv``).
    jd_tdb : array_like
        Epochs of shape S shared by all bodies, or with ``per_body=True`` an array of shape
        (n_bodies, ...) whose row k holds body k's epochs.
    central : str, optional
        Express every state about this body. None (default): each body about its own central
        body (no ephemeris needed).
    frame, source, registry, out_of_range
        As in :func:`states`.

    Returns
    -------
    r_km, v_km_s : ndarray, shape (n_bodies, *S, 3) (or ``jd_tdb.shape + (3,)`` per body)
    """
    r, v = element_set.states_about_central(jd_tdb, per_body=per_body)
    jd = np.asarray(jd_tdb, dtype=float)
    if central is not None:
        reg = registry if registry is not None else default_registry()
        epochs = jd if per_body else np.broadcast_to(jd, (len(element_set), *jd.shape))
        for name in np.unique(element_set.central_body):
            rows = element_set.central_body == name
            dr, dv = states(
                name,
                epochs[rows],
                central=central,
                source=source,
                registry=reg,
                out_of_range=out_of_range,
            )
            r[rows] += dr
            v[rows] += dv
        out_frame = check_frame(_output_frame(frame, reg.get(central, field="central")))
    else:
        if isinstance(frame, str) and frame.strip().lower() == EQUATOR:
            raise InputError("frame", frame, "'icrf' or 'ecliptic' when central is None")
        out_frame = check_frame(frame)
    if not (isinstance(out_frame, str) and out_frame.strip().lower() == ICRF):
        r = rotate(r, ICRF, out_frame)
        v = rotate(v, ICRF, out_frame)
    return r, v


__all__ = [
    "OUT_OF_RANGE_MODES",
    "State",
    "element_set_states",
    "states",
]
