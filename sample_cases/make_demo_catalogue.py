"""Write the demo survey catalogue: invented near-Earth-like small bodies, from a fixed seed.

    python sample_cases/make_demo_catalogue.py            # rewrites sample_cases/demo_catalogue.csv
    python sample_cases/make_demo_catalogue.py --out x.csv

Every body is made up (names "AW-0001" ...); none stands for a real object. The orbits are drawn
from simple distributions with near-Earth-like shapes: semi-major axis 0.75-3.5 au, skewed towards
1-2 au; eccentricity 0.02-0.75; perihelion inside 1.3 au (the usual near-Earth bound, common
practice) and outside 0.2 au; inclination Rayleigh-like, mostly below 20 deg; node, argument of
perihelion and mean anomaly uniform; radius log-uniform 20 m to 5 km. One epoch for all.

Only ``random.Random(seed).random()`` is used (Python guarantees its sequence for a given seed
across versions) and the transforms are written out here, so the file is reproducible byte for
byte (tests/test_survey.py checks it).
"""

from __future__ import annotations

import argparse
import math
import random
from pathlib import Path

SEED = 20310101
COUNT = 3000
EPOCH_UTC = "2031-01-01T00:00:00Z"
HEADER = (
    "name,epoch_utc,central_body,semi_major_axis_au,eccentricity,inclination_deg,raan_deg,"
    "arg_periapsis_deg,mean_anomaly_deg,radius_km"
)
PERIHELION_MAX_AU = 1.3
PERIHELION_MIN_AU = 0.2


def _body(rng: random.Random) -> tuple[float, float, float, float, float, float, float]:
    """(a_au, e, i_deg, raan_deg, argp_deg, M_deg, radius_km) of one invented body."""
    while True:
        # a: 0.8 au plus an exponential tail (mean 0.5 au), capped at 3.5 au.
        a_au = 0.8 - 0.5 * math.log(1.0 - rng.random())
        # e: a uniform variable to the power 1.3 leans towards low eccentricities.
        e = 0.02 + 0.6 * rng.random() ** 1.3
        q_au = a_au * (1.0 - e)
        if a_au <= 3.5 and PERIHELION_MIN_AU < q_au < PERIHELION_MAX_AU:
            break
    # Inclination: Rayleigh with scale 6 deg (inverse CDF), folded below 60 deg.
    inclination = 6.0 * math.sqrt(-2.0 * math.log(1.0 - rng.random()))
    inclination = inclination if inclination < 60.0 else 120.0 - inclination
    raan = 360.0 * rng.random()
    argp = 360.0 * rng.random()
    mean_anomaly = 360.0 * rng.random()
    radius_km = 0.02 * 250.0 ** rng.random()
    return a_au, e, inclination, raan, argp, mean_anomaly, radius_km


def catalogue_text(count: int = COUNT, seed: int = SEED) -> str:
    """The catalogue as CSV text (header comment, column names, one row per body)."""
    rng = random.Random(seed)
    lines = [
        "# Invented small bodies for arcwindow survey demos: none of them exists.",
        f"# Written by sample_cases/make_demo_catalogue.py (seed {seed}, {count} bodies).",
        HEADER,
    ]
    for number in range(1, count + 1):
        a_au, e, inc, raan, argp, mean_anomaly, radius_km = _body(rng)
        lines.append(
            f"AW-{number:04d},{EPOCH_UTC},sun,{a_au:.6f},{e:.6f},{inc:.4f},{raan:.4f},"
            f"{argp:.4f},{mean_anomaly:.4f},{radius_km:.3f}"
        )
    return "\n".join(lines) + "\n"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Write the invented demo survey catalogue.")
    parser.add_argument(
        "--out",
        type=Path,
        default=Path(__file__).resolve().with_name("demo_catalogue.csv"),
        help="CSV file to write (default: sample_cases/demo_catalogue.csv)",
    )
    parser.add_argument("--count", type=int, default=COUNT, help=f"bodies (default {COUNT})")
    args = parser.parse_args(argv)
    args.out.write_bytes(catalogue_text(args.count).encode("ascii"))
    print(f"wrote {args.count} invented bodies to {args.out}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
