"""Bodies defined by orbital elements at an epoch, moved as two-body orbits.

A case file (or a survey's CSV of thousands of targets) can define bodies the ephemeris does not
know: invented planets, asteroids, a moon of a planet. Each is a conic about a stated central body:

* elements: semi-major axis (km or au; negative for a hyperbola), eccentricity (0 <= e, e != 1),
  inclination, right ascension/longitude of the ascending node, argument of periapsis, and the
  mean or true anomaly at the epoch, angles in degrees;
* epoch: ISO 8601 UTC or JD TDB;
* frame of the elements: ``"ecliptic"`` (J2000, the default for Sun-centred bodies), ``"icrf"``
  (the default for every other central body) or ``"equator"`` (the central body's equator, from
  its IAU pole in the registry: the frame in which "prograde" means about the planet's north pole);
* GM of the two-body motion: GM(central) + GM(body) (the body's own GM counts when given).

Motion: mean anomaly M(t) = M0 + n (t - t0), n = sqrt(GM / |a|^3), solved for the true anomaly by
``solver.kepler.mean_to_true_anomaly`` and placed by ``solver.kepler.elements_to_state``: exact
two-body motion, any time span, no step error.

CSV format (one body per row; ``#`` starts a comment line; header names are case-insensitive)::

    name,epoch_utc,central_body,semi_major_axis_au,eccentricity,inclination_deg,raan_deg,
        arg_periapsis_deg,mean_anomaly_deg,gm_km3_s2,radius_km,frame

* exactly one of ``epoch_utc`` / ``epoch_jd_tdb``;
* exactly one of ``semi_major_axis_km`` / ``semi_major_axis_au``;
* exactly one of ``mean_anomaly_deg`` / ``true_anomaly_deg``;
* optional: ``central_body`` (default ``sun``), ``gm_km3_s2``, ``radius_km``, ``frame``
  (empty cells take the defaults).

Bad rows raise :class:`~solver.errors.InputError` naming the row, the column, the value and the
accepted range.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import ArrayLike, NDArray

from solver.constants import AU_KM, SECONDS_PER_DAY
from solver.errors import InputError
from solver.frames import ECLIPTIC, ICRF, ICRF_TO_ECLIPTIC, equator_frame
from solver.kepler import (
    elements_to_state,
    mean_to_true_anomaly,
    perifocal_to_reference,
    true_to_mean_anomaly,
)

if TYPE_CHECKING:
    from solver.bodies import BodyRegistry

EQUATOR = "equator"
ELEMENT_FRAMES: tuple[str, ...] = (ECLIPTIC, ICRF, EQUATOR)

# Above this many (body x epoch) states, work in chunks to bound memory (each state costs about
# 30 float64 temporaries inside elements_to_state).
_CHUNK_STATES = 200_000


@dataclass(frozen=True)
class ElementBody:
    """One body on a two-body orbit, in canonical form (mean anomaly, km, degrees).

    Build it with :meth:`ElementBody.from_elements` (validates, converts units, resolves the
    central body's GM and pole) rather than directly.

    Attributes
    ----------
    name : str
        Display name; looked up case-insensitively.
    epoch_jd_tdb : float
        Epoch of the elements, JD TDB.
    central_body : str
        Lower-case name of the body the orbit is about.
    semi_major_axis_km : float
        km; negative for a hyperbola.
    eccentricity : float
        0 <= e < 1 (ellipse) or e > 1 (hyperbola).
    inclination_deg, raan_deg, arg_periapsis_deg, mean_anomaly_deg : float
        Angles at the epoch, deg, in ``frame``.
    mu_km3_s2 : float
        GM of the two-body motion, GM(central) + GM(body), km^3/s^2.
    frame : str
        ``"ecliptic"``, ``"icrf"`` or ``"equator"``.
    pole_ra_deg, pole_dec_deg : float
        The central body's pole for ``frame == "equator"`` (NaN otherwise).
    gm_km3_s2, radius_km : float
        The body's own GM and radius (NaN when not given).
    """

    name: str
    epoch_jd_tdb: float
    central_body: str
    semi_major_axis_km: float
    eccentricity: float
    inclination_deg: float
    raan_deg: float
    arg_periapsis_deg: float
    mean_anomaly_deg: float
    mu_km3_s2: float
    frame: str = ECLIPTIC
    pole_ra_deg: float = math.nan
    pole_dec_deg: float = math.nan
    gm_km3_s2: float = math.nan
    radius_km: float = math.nan

    @classmethod
    def from_elements(
        cls,
        name: str,
        *,
        eccentricity: float,
        inclination_deg: float,
        raan_deg: float,
        arg_periapsis_deg: float,
        central_body: str = "sun",
        epoch_utc: str | None = None,
        epoch_jd_tdb: float | None = None,
        semi_major_axis_km: float | None = None,
        semi_major_axis_au: float | None = None,
        mean_anomaly_deg: float | None = None,
        true_anomaly_deg: float | None = None,
        gm_km3_s2: float | None = None,
        radius_km: float | None = None,
        frame: str | None = None,
        registry: BodyRegistry | None = None,
        field_prefix: str = "",
    ) -> ElementBody:
        """Validate plain values (units in the names) and build an :class:`ElementBody`.

        Give exactly one of ``epoch_utc``/``epoch_jd_tdb``, of ``semi_major_axis_km``/
        ``semi_major_axis_au`` and of ``mean_anomaly_deg``/``true_anomaly_deg``. The central body
        is looked up in ``registry`` (default: the built-in one) for its GM and, for
        ``frame="equator"``, its pole. ``field_prefix`` is put before field names in error
        messages (e.g. ``"targets.csv row 7: "``).

        Examples
        --------
        >>> body = ElementBody.from_elements(
        ...     "Tallis", epoch_utc="2030-01-01", semi_major_axis_au=2.1, eccentricity=0.12,
        ...     inclination_deg=4.0, raan_deg=80.0, arg_periapsis_deg=150.0,
        ...     mean_anomaly_deg=10.0)
        >>> body.central_body, body.frame
        ('sun', 'ecliptic')
        """
        from solver.bodies import default_registry
        from solver.timescales import utc_to_jd_tdb

        reg = registry if registry is not None else default_registry()
        pre = field_prefix

        if not isinstance(name, str) or not name.strip():
            raise InputError(pre + "name", name, "a non-empty name")
        name = name.strip()
        central = reg.get(central_body, field=pre + "central_body")
        if not (np.isfinite(central.gm_km3_s2) and central.gm_km3_s2 > 0):
            raise InputError(pre + "central_body", central_body, "a body with a known GM")

        epoch = _one_of(pre, epoch_utc=epoch_utc, epoch_jd_tdb=epoch_jd_tdb)
        if epoch[0] == "epoch_utc":
            epoch_jd = float(utc_to_jd_tdb(epoch[1], field=pre + "epoch_utc"))
        else:
            epoch_jd = _number(pre + "epoch_jd_tdb", epoch[1])

        sma = _one_of(pre, semi_major_axis_km=semi_major_axis_km,
                      semi_major_axis_au=semi_major_axis_au)  # fmt: skip
        a_value = _number(pre + sma[0], sma[1])
        a_km = a_value * AU_KM if sma[0] == "semi_major_axis_au" else a_value
        e = _number(pre + "eccentricity", eccentricity)
        if e < 0.0:
            raise InputError(pre + "eccentricity", e, ">= 0 (0 <= e < 1 ellipse, e > 1 hyperbola)")
        if e == 1.0:
            raise InputError(
                pre + "eccentricity", e, "not exactly 1 (a parabola has no semi-major axis)"
            )
        if e < 1.0 and not a_value > 0.0:
            raise InputError(pre + sma[0], a_value, "> 0 for an ellipse (eccentricity < 1)")
        if e > 1.0 and not a_value < 0.0:
            raise InputError(
                pre + sma[0], a_value, "< 0 for a hyperbola (eccentricity > 1); or e < 1 if a > 0"
            )
        inc = _number(pre + "inclination_deg", inclination_deg)
        if not 0.0 <= inc <= 180.0:
            raise InputError(pre + "inclination_deg", inc, "0 to 180 deg")
        raan = _number(pre + "raan_deg", raan_deg)
        argp = _number(pre + "arg_periapsis_deg", arg_periapsis_deg)

        anomaly = _one_of(pre, mean_anomaly_deg=mean_anomaly_deg,
                          true_anomaly_deg=true_anomaly_deg)  # fmt: skip
        anomaly_value = _number(pre + anomaly[0], anomaly[1])
        if anomaly[0] == "true_anomaly_deg":
            if e > 1.0:
                limit = math.degrees(math.acos(-1.0 / e))
                wrapped = (anomaly_value + 180.0) % 360.0 - 180.0
                if not abs(wrapped) < limit:
                    raise InputError(
                        pre + "true_anomaly_deg",
                        anomaly_value,
                        f"|true anomaly| < {limit:.4f} deg for a hyperbola with e = {e:g}",
                    )
                anomaly_value = wrapped
            mean_deg = math.degrees(float(true_to_mean_anomaly(math.radians(anomaly_value), e)))
        else:
            mean_deg = anomaly_value

        gm_body = math.nan
        if gm_km3_s2 is not None and not _blank(gm_km3_s2):
            gm_body = _number(pre + "gm_km3_s2", gm_km3_s2)
            if gm_body < 0.0:
                raise InputError(pre + "gm_km3_s2", gm_body, ">= 0 km^3/s^2")
        radius = math.nan
        if radius_km is not None and not _blank(radius_km):
            radius = _number(pre + "radius_km", radius_km)
            if not radius > 0.0:
                raise InputError(pre + "radius_km", radius, "> 0 km")

        if frame is None or _blank(frame):
            frame_name = ECLIPTIC if central.name == "sun" else ICRF
        else:
            frame_name = str(frame).strip().lower()
            if frame_name not in ELEMENT_FRAMES:
                raise InputError(pre + "frame", frame, "'ecliptic', 'icrf' or 'equator'")
        pole_ra = pole_dec = math.nan
        if frame_name == EQUATOR:
            if not np.isfinite(central.pole_ra_deg):
                raise InputError(
                    pre + "frame", frame, f"'ecliptic' or 'icrf' ({central.name} has no pole)"
                )
            pole_ra, pole_dec = central.pole_ra_deg, central.pole_dec_deg

        mu = central.gm_km3_s2 + (0.0 if math.isnan(gm_body) else gm_body)
        return cls(
            name=name,
            epoch_jd_tdb=epoch_jd,
            central_body=central.name,
            semi_major_axis_km=float(a_km),
            eccentricity=e,
            inclination_deg=inc,
            raan_deg=raan,
            arg_periapsis_deg=argp,
            mean_anomaly_deg=mean_deg,
            mu_km3_s2=float(mu),
            frame=frame_name,
            pole_ra_deg=float(pole_ra),
            pole_dec_deg=float(pole_dec),
            gm_km3_s2=gm_body,
            radius_km=radius,
        )


def _blank(value: object) -> bool:
    return isinstance(value, str) and not value.strip()


def _number(field_name: str, value: object) -> float:
    try:
        number = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        raise InputError(field_name, value, "a finite number") from None
    if not math.isfinite(number):
        raise InputError(field_name, value, "a finite number")
    return number


def _one_of(prefix: str, **options: object) -> tuple[str, object]:
    given = [(k, v) for k, v in options.items() if v is not None and not _blank(v)]
    names = " or ".join(options)
    if len(given) != 1:
        shown = ", ".join(k for k, _ in given) if given else "neither"
        raise InputError(prefix + names, shown, f"exactly one of {names}")
    return given[0]


# ---------------------------------------------------------------------------------------------
# Many bodies at once
# ---------------------------------------------------------------------------------------------
class ElementSet:
    """Many element bodies as arrays, for states of all of them at many epochs in one call.

    Parameters
    ----------
    bodies : sequence of ElementBody
        Names must be unique (case-insensitively).
    """

    def __init__(self, bodies: Sequence[ElementBody]) -> None:
        self._bodies = tuple(bodies)
        seen: set[str] = set()
        for body in self._bodies:
            key = body.name.lower()
            if key in seen:
                raise InputError("name", body.name, "a name used only once")
            seen.add(key)
        n = len(self._bodies)

        def column(attr: str) -> NDArray[np.float64]:
            return np.array([getattr(b, attr) for b in self._bodies], dtype=float).reshape(n)

        self.names: NDArray[np.str_] = np.array([b.name for b in self._bodies], dtype=str)
        self.central_body: NDArray[np.str_] = np.array(
            [b.central_body for b in self._bodies], dtype=str
        )
        self.frame: NDArray[np.str_] = np.array([b.frame for b in self._bodies], dtype=str)
        self.epoch_jd_tdb = column("epoch_jd_tdb")
        self.semi_major_axis_km = column("semi_major_axis_km")
        self.eccentricity = column("eccentricity")
        self.mu_km3_s2 = column("mu_km3_s2")
        self.gm_km3_s2 = column("gm_km3_s2")
        self.radius_km = column("radius_km")
        self._inc = np.radians(column("inclination_deg"))
        self._raan = np.radians(column("raan_deg"))
        self._argp = np.radians(column("arg_periapsis_deg"))
        self._m0 = np.radians(column("mean_anomaly_deg"))
        self._n_rad_s = np.sqrt(self.mu_km3_s2 / np.abs(self.semi_major_axis_km) ** 3)
        # One matrix per body: perifocal -> its element frame -> ICRF.
        to_icrf = np.empty((n, 3, 3))
        for k, body in enumerate(self._bodies):
            if body.frame == ICRF:
                to_icrf[k] = np.eye(3)
            elif body.frame == ECLIPTIC:
                to_icrf[k] = ICRF_TO_ECLIPTIC.T
            else:
                to_icrf[k] = equator_frame(body.pole_ra_deg, body.pole_dec_deg).icrf_to_frame.T
        self._perifocal_to_icrf = to_icrf @ perifocal_to_reference(
            self._inc, self._raan, self._argp
        )

    def __len__(self) -> int:
        return len(self._bodies)

    def __iter__(self):
        return iter(self._bodies)

    def __getitem__(self, index: int) -> ElementBody:
        return self._bodies[index]

    @property
    def bodies(self) -> tuple[ElementBody, ...]:
        return self._bodies

    def states_about_central(
        self, jd_tdb: ArrayLike, *, per_body: bool = False
    ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """Position (km) and velocity (km/s) of every body relative to its own central body, ICRF.

        Parameters
        ----------
        jd_tdb : array_like
            ``per_body=False``: epochs of any shape S, the same for every body.
            ``per_body=True``: shape (n_bodies, ...), row k holding body k's own epochs.

        Returns
        -------
        r_km, v_km_s : ndarray, shape (n_bodies, *S, 3) (or ``jd_tdb.shape + (3,)`` per body)
        """
        jd = np.asarray(jd_tdb, dtype=float)
        n = len(self)
        if per_body:
            if jd.ndim == 0 or jd.shape[0] != n:
                raise InputError(
                    "jd_tdb", f"array of shape {jd.shape}", f"shape ({n}, ...) with per_body=True"
                )
            epochs = jd.reshape(n, -1)
            out_shape = jd.shape
        else:
            epochs = np.broadcast_to(jd.reshape(1, -1), (n, jd.size))
            out_shape = (n, *jd.shape)
        m_per_body = epochs.shape[1]
        r_out = np.empty((n, m_per_body, 3))
        v_out = np.empty((n, m_per_body, 3))
        rows_per_chunk = max(1, _CHUNK_STATES // max(1, m_per_body))
        for start in range(0, n, rows_per_chunk):
            sl = slice(start, min(n, start + rows_per_chunk))
            self._fill(sl, epochs[sl], r_out[sl], v_out[sl])
        return r_out.reshape(*out_shape, 3), v_out.reshape(*out_shape, 3)

    def _fill(self, sl: slice, epochs, r_out, v_out) -> None:
        dt_s = (epochs - self.epoch_jd_tdb[sl, None]) * SECONDS_PER_DAY
        e = self.eccentricity[sl, None]
        mean_anomaly = self._m0[sl, None] + self._n_rad_s[sl, None] * dt_s
        nu = mean_to_true_anomaly(mean_anomaly, e)
        r_pf, v_pf = elements_to_state(
            self.semi_major_axis_km[sl, None], e, 0.0, 0.0, 0.0, nu, self.mu_km3_s2[sl, None]
        )
        rot_t = self._perifocal_to_icrf[sl].transpose(0, 2, 1)
        np.matmul(r_pf, rot_t, out=r_out)
        np.matmul(v_pf, rot_t, out=v_out)


# ---------------------------------------------------------------------------------------------
# CSV
# ---------------------------------------------------------------------------------------------
CSV_REQUIRED = ("name", "eccentricity", "inclination_deg", "raan_deg", "arg_periapsis_deg")
CSV_ONE_OF = (
    ("epoch_utc", "epoch_jd_tdb"),
    ("semi_major_axis_km", "semi_major_axis_au"),
    ("mean_anomaly_deg", "true_anomaly_deg"),
)
CSV_OPTIONAL = ("central_body", "gm_km3_s2", "radius_km", "frame")
_CSV_KNOWN = set(CSV_REQUIRED) | {c for pair in CSV_ONE_OF for c in pair} | set(CSV_OPTIONAL)
ELEMENT_FIELDS: frozenset[str] = frozenset(_CSV_KNOWN)
"""Every field name of an element body: CSV columns, case ``[[bodies]]`` keys and the keyword
arguments of :meth:`ElementBody.from_elements` (plus ``name``)."""


def read_element_csv(
    source: str | Path | io.TextIOBase,
    *,
    registry: BodyRegistry | None = None,
    label: str | None = None,
) -> ElementSet:
    """Read element bodies from a CSV (format in the module docstring).

    Parameters
    ----------
    source : path or open text file
        The CSV.
    registry : BodyRegistry, optional
        Where central bodies are looked up (default: the built-in registry).
    label : str, optional
        Name of the file in error messages (default: the path).

    Returns
    -------
    ElementSet
    """
    if isinstance(source, (str, Path)):
        path = Path(source)
        label = label or path.name
        try:
            text = path.read_text(encoding="utf-8-sig")
        except OSError as exc:
            raise InputError(
                "elements_csv", str(path), f"a readable CSV file ({exc.strerror})"
            ) from None
        handle: Iterable[str] = io.StringIO(text)
    else:
        label = label or "elements CSV"
        handle = source
    lines = (line for line in handle if line.strip() and not line.lstrip().startswith("#"))
    reader = csv.reader(lines)
    try:
        header = next(reader)
    except StopIteration:
        raise InputError(label, "empty file", "a header row and one row per body") from None
    columns = [h.strip().lower() for h in header]
    unknown = [c for c in columns if c not in _CSV_KNOWN]
    if unknown:
        raise InputError(f"{label} header", unknown[0], "columns " + ", ".join(sorted(_CSV_KNOWN)))
    for required in CSV_REQUIRED:
        if required not in columns:
            raise InputError(f"{label} header", ",".join(columns), f"a '{required}' column")
    for pair in CSV_ONE_OF:
        present = [c for c in pair if c in columns]
        if len(present) != 1:
            wanted = " or ".join(pair)
            raise InputError(f"{label} header", ",".join(columns), f"exactly one of {wanted}")
    bodies = []
    for row_number, row in enumerate(reader, start=2):
        if len(row) != len(columns):
            raise InputError(
                f"{label} row {row_number}", ",".join(row), f"{len(columns)} comma-separated cells"
            )
        values = {c: v.strip() for c, v in zip(columns, row, strict=True)}
        kwargs: dict[str, object] = {c: (values[c] or None) for c in values if c != "name"}
        bodies.append(
            ElementBody.from_elements(
                values["name"],
                registry=registry,
                field_prefix=f"{label} row {row_number}: ",
                **kwargs,  # type: ignore[arg-type]
            )
        )
    if not bodies:
        raise InputError(label, "no rows", "at least one body")
    return ElementSet(bodies)
