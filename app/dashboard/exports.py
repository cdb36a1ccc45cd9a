"""Downloads: the grid as CSV, the selected arc as CCSDS OEM and JSON, figures as HTML.

The grid and arc formats belong to ``solver.export`` (written on main); until it is merged into
this branch the adapters below fall back to a minimal stand-in, marked TEMPORARY, that is to be
deleted with the merge. Figures download as PNG in the browser (the graph's camera button and
the page's PNG buttons) and as standalone HTML from here, with plotly.js inlined so the file
opens without a network.
"""

from __future__ import annotations

import json
import re

import numpy as np
import plotly.graph_objects as go

from solver.case import Case
from solver.window import METRICS, Arc, WindowGrid

try:  # the project's exporters (solver/export.py, on main)
    from solver import export as _export
except ImportError:  # TEMPORARY: until solver/export.py is merged into this branch
    _export = None


def safe_name(text: str) -> str:
    """A file-name stem from free text."""
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", text).strip("_")[:80] or "arcwindow"


def grid_csv(grid: WindowGrid) -> str:
    """Every arc of the grid, one row per cell and arc slot."""
    if _export is not None:
        return _export.grid_to_frame(grid).to_csv(index=False)
    import pandas as pd  # TEMPORARY stand-in below

    from solver.timescales import jd_tdb_to_utc

    n_dep, n_arr, slots = grid.shape
    i, j, k = np.meshgrid(np.arange(n_dep), np.arange(n_arr), np.arange(slots), indexing="ij")
    frame = pd.DataFrame(
        {
            "departure_utc": np.asarray(jd_tdb_to_utc(grid.departure_jd_tdb, digits=0))[i.ravel()],
            "arrival_utc": np.asarray(jd_tdb_to_utc(grid.arrival_jd_tdb, digits=0))[j.ravel()],
            "revolutions": grid.revolutions[k.ravel()],
            "branch": grid.branch[k.ravel()],
            "tof_days": grid.tof_days[i.ravel(), j.ravel()],
            **{name: grid.arcs[name].ravel() for name in METRICS if name in grid.arcs},
            "within_limits": grid.within.ravel(),
            "reason": grid.reason.ravel(),
        }
    )
    return frame.to_csv(index=False)


def arc_oem(case: Case, arc: Arc) -> str:
    """CCSDS OEM 2.0 text of the arc."""
    if _export is not None:
        return _export.arc_oem_text(case, arc)
    from solver.constants import SECONDS_PER_DAY  # TEMPORARY stand-in below
    from solver.kepler import propagate
    from solver.oem import format_oem
    from solver.timescales import jd_tdb_to_utc
    from solver.window import case_hash, ephemeris_label

    t_s = np.linspace(0.0, arc.tof_days * SECONDS_PER_DAY, 101)
    r, v = propagate(arc.r1_km, arc.v1_km_s, t_s, arc.mu_km3_s2)
    epochs = [
        str(e).rstrip("Z") for e in jd_tdb_to_utc(arc.departure_jd_tdb + t_s / SECONDS_PER_DAY)
    ]
    return format_oem(
        epochs,
        r,
        v,
        object_name="ARCWINDOW TRANSFER",
        object_id="UNKNOWN",
        center_name=case.central_body.upper(),
        ref_frame="ICRF",
        time_system="UTC",
        originator="arcwindow",
        comments=[f"case {case.title} ({case_hash(case)})", ephemeris_label(case)],
    )


def arc_json(case: Case, arc: Arc) -> str:
    """The arc as JSON text (states, metrics, provenance)."""
    if _export is not None:
        return json.dumps(_export.arc_json(case, arc), indent=1, default=float)
    from solver.window import provenance  # TEMPORARY stand-in below

    return json.dumps(
        {
            "departure_jd_tdb": arc.departure_jd_tdb,
            "arrival_jd_tdb": arc.arrival_jd_tdb,
            "revolutions": arc.revolutions,
            "branch": arc.branch,
            "r1_km": arc.r1_km.tolist(),
            "v1_km_s": arc.v1_km_s.tolist(),
            "r2_km": arc.r2_km.tolist(),
            "v2_km_s": arc.v2_km_s.tolist(),
            "metrics": arc.metrics,
            "provenance": provenance(case),
        },
        indent=1,
        default=float,
    )


def figure_html(fig: go.Figure, title: str) -> str:
    """A standalone HTML page of a figure (plotly.js inlined: opens offline)."""
    fig = go.Figure(fig)
    fig.update_layout(title={"text": title})
    return fig.to_html(include_plotlyjs=True, full_html=True)
