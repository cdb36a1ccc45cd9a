"""A fingerprint of the numbers the engine produces for a fixed set of cases.

The engine version (``solver.ENGINE_VERSION``) keys the grid cache and survey chunks, so a change
that moves any number without a new version would serve stale results from a cache.
``tests/test_engine_version.py`` recomputes this fingerprint and compares it with the one stored
for the current version.

Run ``python tests/engine_fingerprint.py --write`` after bumping ``ENGINE_VERSION`` to store the
new fingerprint (and say in the CHANGELOG what changed).
"""

from __future__ import annotations

import argparse
import hashlib
import json
from pathlib import Path
from typing import Any

import numpy as np

STORED = Path(__file__).parent / "reference_data" / "engine_fingerprint.json"
SIGNIFICANT_DIGITS = 9  # below this, last-bit differences between CPUs do not count as changes
COARSE_STEP_DAYS = 7.0  # sample windows at a weekly step keep the fingerprint quick


def _digest(values: Any) -> str:
    array = np.asarray(values, dtype=float).ravel()
    text = np.array2string(
        array,
        precision=SIGNIFICANT_DIGITS - 1,
        floatmode="maxprec",
        threshold=array.size + 1,
        max_line_width=1 << 30,
        formatter={"float_kind": lambda x: f"{x:.{SIGNIFICANT_DIGITS}g}"},
    )
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def compute() -> dict[str, str]:
    """Digests of grids, best arcs and single Lambert solutions for the sample cases."""
    from app.samples import load, sample_case_paths
    from solver.mechanics.lambert import solve_lambert
    from solver.window.grid import compute_window
    from solver.window.refine import refine_best

    out: dict[str, str] = {}
    for path in sample_case_paths():
        case = load(str(path))
        coarse = case.with_changes(
            **{
                "window.departure_step_days": max(COARSE_STEP_DAYS, case.departure_step_days),
                "window.arrival_step_days": max(COARSE_STEP_DAYS, case.arrival_step_days),
            }
        )
        grid = compute_window(coarse)
        out[f"{path.stem}.axes"] = _digest(
            np.concatenate([grid.departure_jd_tdb, grid.arrival_jd_tdb])
        )
        for name in (
            "c3_km2_s2",
            "vinf_arrival_km_s",
            "dv_total_km_s",
            "dla_deg",
            "delivered_mass_kg",
        ):
            out[f"{path.stem}.{name}"] = _digest(grid.metric(name))
        out[f"{path.stem}.tof_days"] = _digest(grid.tof_days)
        out[f"{path.stem}.within"] = _digest(grid.within)
        if grid.best_cell("dv_total_km_s") is not None:
            best = refine_best(coarse, grid, "dv_total_km_s").arc
            out[f"{path.stem}.best"] = _digest(
                [best.departure_jd_tdb, best.arrival_jd_tdb, best.metrics["dv_total_km_s"]]
            )
    sol = solve_lambert(
        np.array([5000.0, 10000.0, 2100.0]),
        np.array([-14600.0, 2500.0, 7000.0]),
        np.array([3600.0, 36000.0]),
        398600.4418,
        max_revs=2,
    )
    out["lambert"] = _digest(np.concatenate([sol.v1_km_s.ravel(), sol.v2_km_s.ravel()]))
    return out


def stored() -> dict[str, Any]:
    return json.loads(STORED.read_text()) if STORED.exists() else {}


def write() -> None:
    from solver import ENGINE_VERSION

    STORED.write_text(
        json.dumps({"engine_version": ENGINE_VERSION, "digests": compute()}, indent=1) + "\n"
    )


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--write", action="store_true", help="store the current fingerprint")
    if parser.parse_args().write:
        write()
        print(f"wrote {STORED.name}")
    else:
        print(json.dumps(compute(), indent=1))
