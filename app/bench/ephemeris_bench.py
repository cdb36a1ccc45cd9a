"""Ephemeris speed: vectorized states against looping over epochs (or bodies) one by one.

The loop baseline is measured on a subsample in the same run and scaled to the full count, so
the ratio is what the window engine and the survey gain by asking for all epochs at once.
"""

from __future__ import annotations

import time

import numpy as np

from app.bench import BenchLine, best_time_s

SEED = 20261202


def _loop_rate(func, items) -> float:
    """Items per second when ``func`` is called once per item."""
    start = time.perf_counter()
    for item in items:
        func(item)
    return len(items) / (time.perf_counter() - start)


def _element_set(n_bodies: int):
    from solver.ephemeris.element_bodies import ElementSet
    from solver.ephemeris.element_input import element_body

    rng = np.random.default_rng(SEED)
    bodies = [
        element_body(
            f"B{k}",
            epoch_jd_tdb=2461000.5,
            semi_major_axis_au=float(rng.uniform(0.6, 5.0)),
            eccentricity=float(rng.uniform(0.0, 0.6)),
            inclination_deg=float(rng.uniform(0.0, 30.0)),
            raan_deg=float(rng.uniform(0.0, 360.0)),
            arg_periapsis_deg=float(rng.uniform(0.0, 360.0)),
            mean_anomaly_deg=float(rng.uniform(-180.0, 180.0)),
        )
        for k in range(n_bodies)
    ]
    return ElementSet(bodies)


def run(size: str = "full") -> list[BenchLine]:
    from solver.ephemeris.states import element_set_states, states
    from solver.ephemeris.timescales import jd_tdb_to_utc, utc_to_jd_tdb

    full = size == "full"
    n_epochs = 100_000 if full else 5_000
    n_loop = 1_000 if full else 100
    rng = np.random.default_rng(SEED)
    jd = np.sort(rng.uniform(2451545.0, 2469807.5, n_epochs))  # 2000-2050
    states("mars", jd[:4])  # load the DE segments, not timed
    states("mars", jd[:4], source="mean")

    lines: list[BenchLine] = []
    for source, label in (("de423", "DE423"), ("mean", "mean elements")):
        vec_s = best_time_s(lambda s=source: states("mars", jd, central="sun", source=s))
        rate = n_epochs / vec_s
        base = _loop_rate(lambda t, s=source: states("mars", t, central="sun", source=s),
                          jd[:n_loop])  # fmt: skip
        lines.append(
            BenchLine(
                section="ephemeris",
                name=f"Mars about the Sun from {label}, {n_epochs:,} epochs in one call",
                value=rate,
                unit="states/s",
                baseline_value=base,
                ratio=rate / base,
                notes=f"baseline: one states() call per epoch, {n_loop:,} epochs timed and scaled",
            )
        )

    n_bodies = 10_000 if full else 500
    n_body_epochs = 100 if full else 20
    bodies = _element_set(n_bodies)
    grid = np.linspace(2461000.5, 2462000.5, n_body_epochs)
    set_s = best_time_s(lambda: element_set_states(bodies, grid, central="sun"), repeats=2)
    set_rate = n_bodies * n_body_epochs / set_s
    n_body_loop = 200 if full else 50
    from solver.ephemeris.bodies import default_registry

    registry = default_registry().with_bodies(bodies[k] for k in range(n_body_loop))
    base_rate = n_body_epochs * _loop_rate(
        lambda k: states(bodies[k].name, grid, central="sun", registry=registry),
        range(n_body_loop),
    )
    lines.append(
        BenchLine(
            section="ephemeris",
            name=f"element bodies: {n_bodies:,} bodies x {n_body_epochs} epochs in one call",
            value=set_rate,
            unit="states/s",
            baseline_value=base_rate,
            ratio=set_rate / base_rate,
            notes=f"baseline: one states() call per body (all epochs at once), {n_body_loop} "
            "bodies timed and scaled",
        )
    )

    n_strings = 100_000 if full else 5_000
    strings = list(jd_tdb_to_utc(jd[:n_strings], digits=3))
    parse_s = best_time_s(lambda: utc_to_jd_tdb(strings), repeats=2)
    parse_rate = n_strings / parse_s
    base_parse = _loop_rate(utc_to_jd_tdb, strings[:n_loop])
    lines.append(
        BenchLine(
            section="ephemeris",
            name=f"ISO 8601 UTC -> JD TDB, {n_strings:,} strings in one call",
            value=parse_rate,
            unit="dates/s",
            baseline_value=base_parse,
            ratio=parse_rate / base_parse,
            notes=f"baseline: one call per string, {n_loop:,} timed and scaled",
        )
    )
    return lines
