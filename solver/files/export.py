"""Exports that downstream tools read: grid tables (CSV, Parquet), arcs (CCSDS OEM, JSON).

Every export states its provenance (ephemeris, constants, engine version, case hash): CSV files
open with ``#`` comment lines (``pandas.read_csv(path, comment="#")`` skips them), Parquet files
carry it in the schema metadata under ``arcwindow.provenance``, JSON under ``"provenance"``, and
OEM files in COMMENT lines.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from solver.ephemeris.timescales import jd_tdb_to_iso_tdb, jd_tdb_to_utc
from solver.errors import InputError
from solver.files.oem import format_oem
from solver.mechanics.families import Family, family_label
from solver.mechanics.kepler import propagate, sample_arc, state_to_elements
from solver.mechanics.lambert import BRANCH_NAMES
from solver.reasons import MassReason, Reason, describe, describe_mass
from solver.window.arc_launch import arc_launch_window, mass_budget, vehicle_comparison
from solver.window.case import Case
from solver.window.case_bodies import CaseBodies
from solver.window.cell import Arc
from solver.window.grid import WindowGrid
from solver.window.mass import MASS_METRICS, mass_reasons
from solver.window.metrics import METRICS
from solver.window.outputs import (
    arc_burns,
    case_outputs,
    in_rtn,
    phase_angles_deg,
    transfer_time_text,
    vector_from_angles,
)
from solver.window.provenance import provenance

GRID_COLUMNS = (
    "departure_utc",
    "arrival_utc",
    "tof_days",
    "revolutions",
    "branch",
    "transfer_type",
    "family",
    "c3_km2_s2",
    "vinf_departure_km_s",
    "dla_deg",
    "rla_deg",
    "vinf_arrival_km_s",
    "vinf_arrival_dec_deg",
    "vinf_arrival_ra_deg",
    "dv_departure_km_s",
    "dv_arrival_km_s",
    "dv_total_km_s",
    "entry_speed_km_s",
    "transfer_angle_deg",
    "periapsis_km",
    "apoapsis_km",
    "a_km",
    "e",
    "injected_mass_kg",
    "propellant_departure_kg",
    "propellant_arrival_kg",
    "delivered_mass_kg",
    "mass_margin_kg",
    "within_limits",
    "reason",
    "mass_reason",
    "departure_jd_tdb",
    "arrival_jd_tdb",
)


BURN_DIRECTION_COLUMNS = tuple(
    f"dv_{end}_{axis}_km_s"
    for end in ("departure", "arrival")
    for axis in ("radial", "along_track", "cross_track")
)
"""Burn components in the local orbital frame (solver.window.outputs.BURN_COMPONENTS)."""

BURN_GRID_COLUMNS = (
    "departure_utc",
    "arrival_utc",
    "tof_days",
    "tof_hours",
    "revolutions",
    "branch",
    "transfer_type",
    "family",
    "phase_deg",
    "dv_departure_km_s",
    *BURN_DIRECTION_COLUMNS[:3],
    "dv_arrival_km_s",
    *BURN_DIRECTION_COLUMNS[3:],
    "dv_total_km_s",
    "vinf_arrival_km_s",
    "transfer_angle_deg",
    "periapsis_km",
    "apoapsis_km",
    "a_km",
    "e",
    *MASS_METRICS,
    "within_limits",
    "reason",
    "mass_reason",
    "departure_jd_tdb",
    "arrival_jd_tdb",
)
"""Columns of a transfer that starts with a burn (no launch: no C3, DLA or RLA): the burns and
their directions, the phasing at departure and the transfer time (solver.window.outputs)."""


def grid_columns(case: Case) -> tuple[str, ...]:
    """The columns of a case's grid table: what fits the case (solver.window.outputs)."""
    fit = case_outputs(case)
    if fit.launch:
        columns: tuple[str, ...] = GRID_COLUMNS
    else:
        columns = tuple(
            c for c in BURN_GRID_COLUMNS if c not in METRICS or c in fit.metrics or c == "tof_days"
        )
    # A metric the layouts above do not place (a newly registered one) still gets its column,
    # before the limits' verdict: every metric of the case is exported.
    placed = set(columns)
    extra = tuple(m for m in fit.metrics if m not in placed)
    if extra:
        at = columns.index("within_limits")
        columns = (*columns[:at], *extra, *columns[at:])
    # Mass columns only where the case gives a mass (how it is counted: the provenance).
    columns = tuple(c for c in columns if c not in MASS_METRICS or c in fit.metrics)
    if not any(c in fit.metrics for c in MASS_METRICS):
        columns = tuple(c for c in columns if c != "mass_reason")
    if not fit.planet_centred:
        columns = tuple(c for c in columns if c != "tof_hours")
    elif "tof_hours" not in columns:
        columns = (*columns[:3], "tof_hours", *columns[3:])
    return columns


def _burn_columns(grid: WindowGrid, i, j, k, phase=None) -> dict[str, Any]:
    """Burn components and phasing per row, from the grid's per-arc v∞ magnitudes and angles
    (the v∞ vectors are v_arc - v_body, ICRF) and the bodies' states at the nodes. ``phase``:
    the phase angle at every departure date, when already computed."""
    arcs = grid.arcs
    leave = vector_from_angles(
        arcs["vinf_departure_km_s"][i, j, k], arcs["dla_deg"][i, j, k], arcs["rla_deg"][i, j, k]
    )
    meet = -vector_from_angles(
        arcs["vinf_arrival_km_s"][i, j, k],
        arcs["vinf_arrival_dec_deg"][i, j, k],
        arcs["vinf_arrival_ra_deg"][i, j, k],
    )
    if grid.case.arrival_mode == "flyby":
        meet = np.where(np.isfinite(meet), 0.0, np.nan)
    dep = in_rtn(leave, grid.departure_r_km[i], grid.departure_v_km_s[i])
    arr = in_rtn(meet, grid.arrival_r_km[j], grid.arrival_v_km_s[j])
    if phase is None:
        phase = phase_angles_deg(grid.case, CaseBodies.of(grid.case), grid.departure_jd_tdb)
    out: dict[str, Any] = {"phase_deg": phase[i]}
    for n, name in enumerate(BURN_DIRECTION_COLUMNS[:3]):
        out[name] = dep[:, n]
    for n, name in enumerate(BURN_DIRECTION_COLUMNS[3:]):
        out[name] = arr[:, n]
    return out


ROWS_PER_BLOCK = 250_000
"""Rows of the grid table built and written at a time: a block costs about 100 MB while it is
written, whatever the grid's size, so exporting a grid needs little memory beyond the grid."""


def grid_to_frame(grid: WindowGrid, departures: slice | None = None) -> pd.DataFrame:
    """One row per cell and arc; a cell with no arc at all is one row carrying its reason.

    Multi-revolution slots that do not exist for a cell (its TOF is below the N-revolution
    minimum) are not arcs and have no row; every cell appears at least once. The columns are
    :func:`grid_columns` of the case: a launch's (:data:`GRID_COLUMNS`) or a transfer that
    starts with a burn (:data:`BURN_GRID_COLUMNS`); ``tof_hours`` about a planet.

    Parameters
    ----------
    grid : WindowGrid
        The solved window.
    departures : slice, optional
        Only the rows of these departure dates (``slice(start, stop)``), for writing a large grid
        block by block; default all. The blocks of :func:`departure_blocks` put end to end give
        the whole table.
    """
    return _FrameMaker(grid).frame(departures or slice(0, grid.shape[0]))


def departure_blocks(grid: WindowGrid, rows: int | None = None) -> list[slice]:
    """Slices of departure dates, each giving about ``rows`` table rows (default
    :data:`ROWS_PER_BLOCK`; at least one date each)."""
    n_dep, n_arr, slots = grid.shape
    step = max(1, (rows or ROWS_PER_BLOCK) // max(1, n_arr * slots))
    return [slice(start, min(n_dep, start + step)) for start in range(0, n_dep, step)]


class _FrameMaker:
    """What every block of a grid's table shares: columns, date texts, category names."""

    def __init__(self, grid: WindowGrid) -> None:
        self.grid = grid
        self.names = grid_columns(grid.case)
        # Text columns are categoricals: a million rows share a few hundred distinct strings.
        self.dep_utc = list(np.atleast_1d(jd_tdb_to_utc(grid.departure_jd_tdb, digits=0)))
        self.arr_utc = list(np.atleast_1d(jd_tdb_to_utc(grid.arrival_jd_tdb, digits=0)))
        self.family_names = [""] + [Family(code).label for code in range(1, max(Family) + 1)]
        self.reason_names = [describe(code) for code in range(max(Reason) + 1)]
        self.branch_names = [BRANCH_NAMES[b] for b in sorted(BRANCH_NAMES)]
        self.mass_reason_names = [describe_mass(code) for code in range(max(MassReason) + 1)]
        self.bodies = CaseBodies.of(grid.case)
        self.phase = None
        if "phase_deg" in self.names:
            self.phase = phase_angles_deg(grid.case, self.bodies, grid.departure_jd_tdb)

    def frame(self, departures: slice) -> pd.DataFrame:
        grid = self.grid
        converged = grid.converged[departures]
        keep = converged.copy()
        keep[..., 0] |= ~converged.any(axis=-1)  # the cell's one row, with the slot-0 reason
        i, j, k = np.nonzero(keep)
        i = i + (departures.start or 0)
        reasons = grid.reason[i, j, k]

        def categorical(codes, names):
            return pd.Categorical.from_codes(np.asarray(codes, dtype=np.int64), categories=names)

        columns: dict[str, Any] = {
            "departure_utc": categorical(i, self.dep_utc),
            "arrival_utc": categorical(j, self.arr_utc),
            "tof_days": grid.tof_days[i, j],
            "revolutions": grid.revolutions[k],
            "branch": categorical(grid.branch[k], self.branch_names),
            "transfer_type": categorical(
                (grid.transfer_angle_deg[i, j] >= 180.0).astype(int), ["I", "II"]
            ),
            "family": categorical(grid.family[i, j, k], self.family_names),
        }
        names = self.names
        for name in names:
            if name in grid.arcs:
                columns[name] = grid.arcs[name][i, j, k]
        if "tof_hours" in names:
            columns["tof_hours"] = columns["tof_days"] * 24.0
        if "phase_deg" in names:
            columns.update(_burn_columns(grid, i, j, k, self.phase))
        columns["transfer_angle_deg"] = grid.transfer_angle_deg[i, j]
        columns["within_limits"] = grid.within[i, j, k]
        columns["reason"] = categorical(reasons, self.reason_names)
        if "mass_reason" in names:
            arcs = grid.arcs
            mass_codes = mass_reasons(
                grid.case,
                self.bodies,
                arcs["c3_km2_s2"][i, j, k],
                arcs["dv_departure_km_s"][i, j, k],
                arcs["dv_arrival_km_s"][i, j, k],
            )
            columns["mass_reason"] = categorical(mass_codes, self.mass_reason_names)
        columns["departure_jd_tdb"] = grid.departure_jd_tdb[i]
        columns["arrival_jd_tdb"] = grid.arrival_jd_tdb[j]
        return pd.DataFrame({name: columns[name] for name in names})


GRID_FORMATS = (".csv", ".parquet")


def write_grid(grid: WindowGrid, path: str | Path) -> Path:
    """Write the grid table to ``.csv`` or ``.parquet`` (chosen by the suffix).

    The file is written block by block (:data:`ROWS_PER_BLOCK` rows at a time), atomically, with
    its SHA-256 beside it (``NAME.sha256``; see :mod:`solver.files.atomic`): a run killed while
    writing leaves the previous file as it was. Stale temporary files of the same name are
    swept first.
    """
    from solver.files.atomic import atomic_output, sweep_temporaries

    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in GRID_FORMATS:
        raise InputError("--out", str(path), "a file name ending in .csv or .parquet")
    sweep_temporaries(path.parent, name_matches=lambda name: name == path.name)
    with atomic_output(path, checksum=True) as handle:
        write_grid_to(handle, grid, suffix)
    return path


def csv_header(prov: dict[str, Any]) -> str:
    """The ``#`` lines that open a grid CSV: provenance, then units (one line per item)."""
    lines = [f"# {key}: {_one_line(value)}\n" for key, value in prov.items()]
    lines.append("# units: in the column names; dates UTC (ISO 8601), JD in TDB\n")
    return "".join(lines)


def _one_line(value: Any) -> str:
    """Provenance text on one line: control characters (a newline in a title) become spaces."""
    return "".join(" " if ord(c) < 32 or ord(c) == 127 else c for c in str(value))


def write_grid_to(handle: Any, grid: WindowGrid, suffix: str) -> None:
    """Write the grid table as ``.csv`` or ``.parquet`` to an open binary file, block by block."""
    import pyarrow as pa

    prov = grid.provenance or provenance(grid.case)
    maker = _FrameMaker(grid)
    blocks = departure_blocks(grid)
    first = pa.Table.from_pandas(maker.frame(blocks[0]), preserve_index=False)
    schema = first.schema
    if suffix == ".csv":
        import pyarrow.csv as pacsv

        # pyarrow writes CSV an order of magnitude faster than pandas for million-row grids;
        # categoricals are written as their text.
        plain = pa.schema(
            [pa.field(f.name, pa.string()) if pa.types.is_dictionary(f.type) else f for f in schema]
        )
        handle.write(csv_header(prov).encode("utf-8"))
        with pacsv.CSVWriter(handle, plain) as writer:
            writer.write_table(first.cast(plain))
            del first
            for block in blocks[1:]:
                table = pa.Table.from_pandas(
                    maker.frame(block), schema=schema, preserve_index=False
                )
                writer.write_table(table.cast(plain))
        return
    import pyarrow.parquet as pq

    metadata = dict(schema.metadata or {})
    metadata[b"arcwindow.provenance"] = json.dumps(prov).encode()
    schema = schema.with_metadata(metadata)
    with pq.ParquetWriter(handle, schema) as writer:
        writer.write_table(first.replace_schema_metadata(metadata))
        del first
        for block in blocks[1:]:
            table = pa.Table.from_pandas(maker.frame(block), schema=schema, preserve_index=False)
            writer.write_table(table.replace_schema_metadata(metadata))


def read_provenance(path: str | Path) -> dict[str, str]:
    """Provenance of a grid file written by :func:`write_grid`, once the file has matched its
    SHA-256 (:class:`solver.files.atomic.DamagedFile` otherwise)."""
    from solver.files.atomic import verify_checksum

    path = Path(path)
    verify_checksum(path)
    if path.suffix.lower() == ".parquet":
        import pyarrow.parquet as pq

        meta = pq.read_schema(path).metadata or {}
        return json.loads(meta.get(b"arcwindow.provenance", b"{}"))
    out = {}
    with open(path, encoding="utf-8") as handle:
        for line in handle:
            if not line.startswith("# "):
                break
            key, _, value = line[2:].rstrip("\n").partition(": ")
            out[key] = value
    return out


# ---------------------------------------------------------------------------------------------
# Single arcs


def arc_json(case: Case, arc: Arc) -> dict[str, Any]:
    """Everything about one arc as plain JSON-able data (states in ICRF, km and km/s)."""
    elements = state_to_elements(arc.r1_km, arc.v1_km_s, arc.mu_km3_s2)

    def clean(value: float) -> float | None:
        return float(value) if math.isfinite(value) else None

    fit = case_outputs(case)
    bodies = CaseBodies.of(case)
    budget = mass_budget(case, arc, bodies=bodies)
    report: dict[str, Any] = {
        "case_title": case.title,
        "departure_utc": str(jd_tdb_to_utc(arc.departure_jd_tdb, digits=0)),
        "arrival_utc": str(jd_tdb_to_utc(arc.arrival_jd_tdb, digits=0)),
        "departure_jd_tdb": arc.departure_jd_tdb,
        "arrival_jd_tdb": arc.arrival_jd_tdb,
        "central_body": case.central_body,
        "departure_body": case.departure_body,
        "target_body": case.target_body,
        "revolutions": arc.revolutions,
        "branch": arc.branch,
        "family": family_label(arc.family, arc.revolutions, arc.branch) if arc.family else None,
        "transfer_type": "I" if arc.transfer_angle_deg < 180.0 else "II",
        "transfer_angle_deg": arc.transfer_angle_deg,
        "solved": arc.ok,
        "reason": describe(arc.reason),
        "within_limits": arc.within,
        "metrics": {
            name: clean(value) for name, value in arc.metrics.items() if name in fit.metrics
        },
        "units": {name: METRICS[name].unit for name in arc.metrics if name in fit.metrics},
        "transfer_time": transfer_time_text(arc.tof_days, fit.planet_centred),
        "tof_hours": arc.tof_days * 24.0,
        "mass_reason": budget.reason or describe_mass(MassReason.OK),
        "mass_budget": budget.as_dict(),
        "vehicles": [b.as_dict() for b in vehicle_comparison(case, arc, bodies)],
        "launch_window": arc_launch_window(case, arc, bodies).as_dict(),
        "frame": "ICRF",
        "r1_km": arc.r1_km.tolist(),
        "v1_km_s": arc.v1_km_s.tolist(),
        "r2_km": arc.r2_km.tolist(),
        "v2_km_s": arc.v2_km_s.tolist(),
        "elements": {
            "a_km": clean(float(elements.a_km)),
            "e": clean(float(elements.e)),
            "inclination_deg": clean(math.degrees(float(elements.inclination_rad))),
            "raan_deg": clean(math.degrees(float(elements.raan_rad))),
            "arg_periapsis_deg": clean(math.degrees(float(elements.arg_periapsis_rad))),
            "true_anomaly_at_departure_deg": clean(math.degrees(float(elements.true_anomaly_rad))),
            "frame": "ICRF (equatorial J2000)",
        },
        "mu_km3_s2": arc.mu_km3_s2,
        "provenance": provenance(case),
    }
    if fit.burns and arc.ok:
        burns = arc_burns(case, arc)

        def rtn(vector) -> dict[str, float]:
            return {
                axis: float(x)
                for axis, x in zip(("radial", "along_track", "cross_track"), vector, strict=True)
            }

        report["burns"] = {
            "frame": "radial, along-track, cross-track of the departure body's orbit at "
            "departure and of the target's orbit at arrival",
            "departure": {
                "dv_km_s": burns.departure_dv_km_s,
                "components_km_s": rtn(burns.departure_rtn_km_s),
            },
            "arrival": {
                "dv_km_s": burns.arrival_dv_km_s,
                "components_km_s": rtn(burns.arrival_rtn_km_s),
            },
            "total_dv_km_s": burns.departure_dv_km_s + burns.arrival_dv_km_s,
            "phase_deg": burns.phase_deg,
        }
    return report


def arc_oem_text(
    case: Case, arc: Arc, *, points_per_revolution: int = 360, min_points: int = 101
) -> str:
    """The arc as a CCSDS OEM 2.0 (KVN) message: TDB epochs, ICRF, about the central body."""
    if not arc.ok:
        raise InputError(
            "arc",
            f"{arc.revolutions} rev {arc.branch}",
            f"a solved arc (this one: {describe(arc.reason)})",
        )
    tof_s = arc.flight_s  # the TDB interval the epochs below are counted in
    t_s, _ = sample_arc(
        arc.r1_km,
        arc.v1_km_s,
        tof_s,
        arc.mu_km3_s2,
        points_per_revolution=points_per_revolution,
        min_points=min_points,
    )
    r, v = propagate(arc.r1_km, arc.v1_km_s, t_s, arc.mu_km3_s2)
    # The end states are the solution's own, exactly (the propagated ones agree to ~1e-10).
    r[0], v[0], r[-1], v[-1] = arc.r1_km, arc.v1_km_s, arc.r2_km, arc.v2_km_s
    epochs = [
        str(e)
        for e in np.atleast_1d(jd_tdb_to_iso_tdb(arc.departure_jd_tdb, t_s / 86400.0, digits=6))
    ]
    prov = provenance(case)
    comments = [
        f"Transfer arc of case '{case.title}' (case hash {prov['case_hash']})",
        f"{case.departure_body} to {case.target_body} about {case.central_body}; "
        f"{arc.revolutions} revolution(s), {arc.branch} branch",
        f"Ephemeris: {prov['ephemeris']}; constants: {prov['constants']}",
        f"Engine: {prov['engine']}; method: {prov['lambert_method']}",
    ]
    return format_oem(
        epochs,
        r,
        v,
        object_name=f"{case.departure_body}-{case.target_body} arc"[:60],
        object_id=f"ARCWINDOW-{prov['case_hash'][:8]}-N{arc.revolutions}{arc.branch[0].upper()}",
        center_name=case.central_body.upper(),
        ref_frame="ICRF",
        time_system="TDB",
        originator="arcwindow",
        comments=comments,
        interpolation="LAGRANGE",
        interpolation_degree=7,
    )


__all__ = [
    "BURN_DIRECTION_COLUMNS",
    "BURN_GRID_COLUMNS",
    "GRID_COLUMNS",
    "GRID_FORMATS",
    "ROWS_PER_BLOCK",
    "arc_json",
    "arc_oem_text",
    "csv_header",
    "departure_blocks",
    "grid_columns",
    "grid_to_frame",
    "read_provenance",
    "write_grid",
    "write_grid_to",
]
