"""Element bodies from plain values: validation, units and the central body's GM and pole.

``element_body`` builds one :class:`~solver.ephemeris.element_bodies.ElementBody` from keyword
values (a case's ``[[bodies]]`` table, a CSV row); ``read_element_csv`` reads many.

CSV format (one body per row; ``#`` starts a comment line; header names are case-insensitive)::

    name,epoch_utc,central_body,semi_major_axis_au,eccentricity,inclination_deg,raan_deg,
        arg_periapsis_deg,mean_anomaly_deg,gm_km3_s2,radius_km,frame

* exactly one of ``epoch_utc`` / ``epoch_jd_tdb``;
* exactly one of ``semi_major_axis_km`` / ``semi_major_axis_au``;
* exactly one of ``mean_anomaly_deg`` / ``true_anomaly_deg``;
* optional: ``central_body`` (default ``sun``), ``gm_km3_s2``, ``radius_km``, ``frame``
  (empty cells take the defaults).

Frames (:mod:`solver.ephemeris.element_bodies`): ``ecliptic`` (the default for Sun-centred
bodies; the J2000 ecliptic with the IAU 2006 obliquity unless the reader is told otherwise),
``ecliptic_iau1976`` (the IAU 1976 obliquity, common for small-body element lists),
``ecliptic_iau2006``, ``icrf`` (the default about other central bodies) or ``equator``.

Bad rows raise :class:`~solver.errors.InputError` naming the row, the column, the value and the
accepted range.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Iterable, Iterator
from pathlib import Path

import numpy as np

from solver.constants import AU_KM
from solver.ephemeris.bodies import (
    ELEMENT_JD_TDB_MAX,
    ELEMENT_JD_TDB_MIN,
    BodyRegistry,
    default_registry,
)
from solver.ephemeris.element_bodies import (
    ECLIPTICS,
    ELEMENT_FRAMES,
    EQUATOR,
    ElementBody,
    ElementSet,
)
from solver.ephemeris.frames import FRAME_ALIASES, ICRF
from solver.ephemeris.timescales import jd_tdb_to_iso_tdb, utc_to_jd_tdb
from solver.errors import InputError, has_control_characters
from solver.mechanics.kepler import true_to_mean_anomaly

MAX_NAME_CHARS = 60
"""Longest element body name: names label plots, files and table rows."""


def element_body(
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
    ecliptic: str = "iau2006",
) -> ElementBody:
    """Validate plain values (units in the names) and build an :class:`ElementBody`.

    Give exactly one of ``epoch_utc``/``epoch_jd_tdb``, of ``semi_major_axis_km``/
    ``semi_major_axis_au`` and of ``mean_anomaly_deg``/``true_anomaly_deg``. The central body
    is looked up in ``registry`` (default: the built-in one) for its GM and, for
    ``frame="equator"``, its pole. ``field_prefix`` is put before field names in error
    messages (e.g. ``"targets.csv row 7: "``). ``ecliptic`` says which J2000 ecliptic a plain
    ``frame="ecliptic"`` (or the Sun-centred default) means: ``"iau2006"`` (84381.406 arcsec)
    or ``"iau1976"`` (84381.448 arcsec); the body keeps the frame it resolved to.

    Examples
    --------
    >>> body = element_body(
    ...     "Tallis", epoch_utc="2030-01-01", semi_major_axis_au=2.1, eccentricity=0.12,
    ...     inclination_deg=4.0, raan_deg=80.0, arg_periapsis_deg=150.0,
    ...     mean_anomaly_deg=10.0)
    >>> body.central_body, body.frame
    ('sun', 'ecliptic')
    """

    reg = registry if registry is not None else default_registry()
    pre = field_prefix

    if (
        not isinstance(name, str)
        or not name.strip()
        or len(name.strip()) > MAX_NAME_CHARS
        or has_control_characters(name)
    ):
        raise InputError(
            pre + "name", name, f"a name of 1 to {MAX_NAME_CHARS} characters, no control characters"
        )
    name = name.strip()
    central = reg.get(central_body, field=pre + "central_body")
    if not (np.isfinite(central.gm_km3_s2) and central.gm_km3_s2 > 0):
        raise InputError(pre + "central_body", central_body, "a body with a known GM")

    epoch = _one_of(pre, epoch_utc=epoch_utc, epoch_jd_tdb=epoch_jd_tdb)
    if epoch[0] == "epoch_utc":
        epoch_jd = float(utc_to_jd_tdb(str(epoch[1]), field=pre + "epoch_utc"))
    else:
        epoch_jd = _number(pre + "epoch_jd_tdb", epoch[1])
    if not ELEMENT_JD_TDB_MIN <= epoch_jd <= ELEMENT_JD_TDB_MAX:
        raise InputError(
            pre + epoch[0],
            epoch[1],
            f"an epoch from {jd_tdb_to_iso_tdb(ELEMENT_JD_TDB_MIN, digits=0)[:10]} to "
            f"{jd_tdb_to_iso_tdb(ELEMENT_JD_TDB_MAX, digits=0)[:10]} (JD {ELEMENT_JD_TDB_MIN} to "
            f"{ELEMENT_JD_TDB_MAX} TDB), the dates element bodies cover",
        )

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

    if ecliptic not in ECLIPTICS:
        raise InputError("ephemeris.ecliptic", ecliptic, "'iau2006' or 'iau1976'")
    if frame is None or _blank(frame):
        frame_name = "ecliptic" if central.name == "sun" else ICRF
    else:
        frame_name = str(frame).strip().lower()
    if frame_name == "ecliptic":  # plain "ecliptic": the one the case or reader chose
        frame_name = ECLIPTICS[ecliptic]
    frame_name = FRAME_ALIASES.get(frame_name, frame_name)
    if frame_name not in ELEMENT_FRAMES:
        raise InputError(
            pre + "frame",
            frame,
            "'ecliptic', 'ecliptic_iau1976', 'ecliptic_iau2006', 'icrf' or 'equator'",
        )
    pole_ra = pole_dec = math.nan
    if frame_name == EQUATOR:
        if not np.isfinite(central.pole_ra_deg):
            raise InputError(
                pre + "frame", frame, f"'ecliptic' or 'icrf' ({central.name} has no pole)"
            )
        pole_ra, pole_dec = central.pole_ra_deg, central.pole_dec_deg

    mu = central.gm_km3_s2 + (0.0 if math.isnan(gm_body) else gm_body)
    return ElementBody(
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
    except (TypeError, ValueError, OverflowError):
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
arguments of :func:`element_body` (plus ``name``)."""


def read_element_csv(
    source: str | Path | io.TextIOBase,
    *,
    registry: BodyRegistry | None = None,
    label: str | None = None,
    ecliptic: str = "iau2006",
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
    ecliptic : {"iau2006", "iau1976"}
        Which J2000 ecliptic rows with ``frame`` ``ecliptic`` (or empty, about the Sun) are in.

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
    reader = _rows(csv.reader(lines), label)
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
            element_body(
                values["name"],
                registry=registry,
                field_prefix=f"{label} row {row_number}: ",
                ecliptic=ecliptic,
                **kwargs,  # type: ignore[arg-type]
            )
        )
    if not bodies:
        raise InputError(label, "no rows", "at least one body")
    return ElementSet(bodies)


def _rows(reader: Iterator[list[str]], label: str) -> Iterator[list[str]]:
    """The CSV reader's rows; a line it cannot read (a NUL byte, a cell over the csv module's
    field limit, an unclosed quote) is one InputError naming the line, not a traceback."""
    while True:
        try:
            row = next(reader)
        except StopIteration:
            return
        except csv.Error as exc:
            line = getattr(reader, "line_num", "?")
            raise InputError(
                f"{label} line {line}", str(exc), "comma-separated text cells (RFC 4180)"
            ) from None
        yield row


__all__ = [
    "CSV_ONE_OF",
    "CSV_OPTIONAL",
    "CSV_REQUIRED",
    "ELEMENT_FIELDS",
    "element_body",
    "read_element_csv",
]
