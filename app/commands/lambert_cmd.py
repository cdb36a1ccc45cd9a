"""``arcwindow lambert``: every arc joining two positions in a given time."""

from __future__ import annotations

import argparse
import json
import math

from solver.caution import CAUTION
from solver.errors import InputError


def parse_vector_km(text: str, field: str) -> tuple[float, float, float]:
    """Parse ``"X,Y,Z"`` into three finite floats, naming ``field`` in the error."""
    parts = [p.strip() for p in str(text).split(",")]
    accepted = "three comma-separated finite numbers, e.g. 7000,0,0"
    if len(parts) != 3:
        raise InputError(field, text, accepted)
    try:
        values = tuple(float(p) for p in parts)
    except ValueError:
        raise InputError(field, text, accepted) from None
    if not all(math.isfinite(v) for v in values):
        raise InputError(field, text, accepted)
    return values  # type: ignore[return-value]


def parse_positive(text: str, field: str, unit: str) -> float:
    """Parse a finite number > 0, naming ``field`` in the error."""
    try:
        value = float(text)
    except (TypeError, ValueError):
        raise InputError(field, text, f"a number > 0 {unit}") from None
    if not math.isfinite(value) or value <= 0.0:
        raise InputError(field, text, f"a finite number > 0 {unit}")
    return value


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "lambert",
        description=(
            "All conic arcs joining r1 and r2 in the given time of flight: the single-revolution "
            "arc and, for N = 1..max-revs, the low- and high-branch N-revolution arcs. " + CAUTION
        ),
    )
    parser.add_argument(
        "--mu-km3-s2",
        required=True,
        metavar="MU",
        help="gravitational parameter of the central body, km^3/s^2",
    )
    parser.add_argument(
        "--r1-km",
        required=True,
        metavar="X,Y,Z",
        help="departure position, km (write --r1-km=-X,Y,Z for a leading minus)",
    )
    parser.add_argument(
        "--r2-km",
        required=True,
        metavar="X,Y,Z",
        help="arrival position, km (write --r2-km=-X,Y,Z for a leading minus)",
    )
    parser.add_argument("--tof-s", required=True, metavar="T", help="time of flight, s")
    parser.add_argument(
        "--max-revs",
        default="0",
        metavar="N",
        help="largest number of complete revolutions (default 0)",
    )
    parser.add_argument(
        "--retrograde", action="store_true", help="angular momentum against the frame's z axis"
    )
    parser.add_argument("--json", action="store_true", help="print JSON")
    parser.set_defaults(run=run)


def solve(args: argparse.Namespace) -> dict:
    """Validate the arguments, solve, and return the report as a plain dict."""
    import numpy as np

    from solver.mechanics.families import classify, family_label
    from solver.mechanics.kepler import state_to_elements
    from solver.mechanics.lambert import BRANCH_NAMES, solve_lambert
    from solver.reasons import describe

    mu = parse_positive(args.mu_km3_s2, "--mu-km3-s2", "km^3/s^2")
    r1 = parse_vector_km(args.r1_km, "--r1-km")
    r2 = parse_vector_km(args.r2_km, "--r2-km")
    tof = parse_positive(args.tof_s, "--tof-s", "s")
    try:
        max_revs = int(args.max_revs)
    except (TypeError, ValueError):
        raise InputError("--max-revs", args.max_revs, "an integer from 0 to 1000") from None
    if not 0 <= max_revs <= 1000:
        raise InputError("--max-revs", args.max_revs, "an integer from 0 to 1000")
    if np.linalg.norm(r1) == 0.0:
        raise InputError("--r1-km", args.r1_km, "a non-zero position vector")
    if np.linalg.norm(r2) == 0.0:
        raise InputError("--r2-km", args.r2_km, "a non-zero position vector")

    from app.commands._common import prepare_solver

    prepare_solver()
    sol = solve_lambert(r1, r2, tof, mu, max_revs=max_revs, retrograde=args.retrograde)
    elements = state_to_elements(np.asarray(r1), sol.v1_km_s, mu)
    families = classify(np.asarray(r1), sol.v1_km_s, np.asarray(r2), tof, mu, sol.revolutions)
    arcs = []
    for k in range(len(sol.revolutions)):
        revs = int(sol.revolutions[k])
        branch = BRANCH_NAMES[int(sol.branch[k])]
        entry: dict = {"revolutions": revs, "branch": branch}
        if sol.converged[k]:
            entry.update(
                family=family_label(int(families.family[k]), revs, branch),
                v1_km_s=[float(v) for v in sol.v1_km_s[k]],
                v2_km_s=[float(v) for v in sol.v2_km_s[k]],
                a_km=float(elements.a_km[k]),
                e=float(elements.e[k]),
                inclination_deg=float(np.degrees(elements.inclination_rad[k])),
                transfer_angle_deg=float(np.degrees(families.transfer_angle_rad[k])),
                iterations=int(sol.iterations[k]),
            )
        else:
            entry.update(reason=describe(int(sol.reason[k])))
        arcs.append(entry)
    return {
        "inputs": {
            "mu_km3_s2": mu,
            "r1_km": list(r1),
            "r2_km": list(r2),
            "tof_s": tof,
            "max_revs": max_revs,
            "direction": "retrograde" if args.retrograde else "prograde",
        },
        "arcs": arcs,
        "caution": CAUTION,
    }


def format_text(report: dict) -> str:
    lines = []
    for arc in report["arcs"]:
        head = f"N={arc['revolutions']} {arc['branch']:>6}: "
        if "reason" in arc:
            lines.append(head + f"no arc ({arc['reason']})")
            continue
        v1 = ", ".join(f"{v:.6f}" for v in arc["v1_km_s"])
        v2 = ", ".join(f"{v:.6f}" for v in arc["v2_km_s"])
        lines.append(head + arc["family"])
        lines.append(f"    v1 = ({v1}) km/s")
        lines.append(f"    v2 = ({v2}) km/s")
        lines.append(
            f"    a = {arc['a_km']:.6f} km, e = {arc['e']:.8f}, "
            f"i = {arc['inclination_deg']:.4f} deg, "
            f"transfer angle = {arc['transfer_angle_deg']:.4f} deg"
        )
    lines.append("")
    lines.append("Caution: " + report["caution"])
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    report = solve(args)
    print(json.dumps(report, indent=2) if args.json else format_text(report))
    return 0
