"""Mass and launch speed: what the mass metrics add to a grid, and daily launch windows.

* The 1000 x 1000 grid of the grid section, solved with and without the mass and launch sections
  (a vehicle table, a wet mass, a propulsion system, a launch site, a minimum delivered mass):
  the goal is at most 15 % more time. Best of three alternating runs of each.
* The daily launch windows of a 21-day launch period (the case-level call the CLI makes, each
  day with its own asymptote): goal under 50 ms. Baseline: the same windows found by sampling
  the day at one-second steps with the same Earth model (vectorized numpy), the obvious way.
"""

from __future__ import annotations

import math
import time

import numpy as np

from app.bench import BenchLine, best_time_s

MASS_SECTIONS = """
[launch_site]
name = "bench site"
latitude_deg = 31.2
longitude_deg = -78.4
azimuth_min_deg = 85
azimuth_max_deg = 115

[spacecraft]
wet_mass_max_kg = 2800
required_delivered_mass_kg = 1500

[[propulsion]]
name = "main engine"
isp_s = 321
burns = ["arrival"]

[[vehicles]]
name = "bench vehicle"
adapter_kg = 60
margin_fraction = 0.03
performance = [
    { c3_km2_s2 = -5.0, mass_kg = 5650.0 },
    { c3_km2_s2 = 0.0, mass_kg = 5000.0 },
    { c3_km2_s2 = 10.0, mass_kg = 3900.0 },
    { c3_km2_s2 = 20.0, mass_kg = 3010.0 },
    { c3_km2_s2 = 30.0, mass_kg = 2290.0 },
    { c3_km2_s2 = 40.0, mass_kg = 1690.0 },
    { c3_km2_s2 = 60.0, mass_kg = 780.0 },
]
"""
PERIOD_DAYS = 21


def _cases(n: int):
    from app.bench.grid_bench import bench_case
    from solver.window.case import dumps_toml, parse_case

    plain = bench_case(n, 0)
    text = dumps_toml(plain).replace("[limits]\n", "[limits]\ndelivered_mass_min_kg = 900.0\n")
    return plain, parse_case(text + MASS_SECTIONS)


def _grid_lines(n: int) -> list[BenchLine]:
    from solver.window.grid import compute_window

    plain, massive = _cases(n)
    small_plain, small_mass = _cases(20)
    compute_window(small_plain)  # kernels loaded, not timed
    compute_window(small_mass)
    without, with_mass = math.inf, math.inf
    for _ in range(3):  # alternate, so both see the same machine load
        without = min(without, best_time_s(lambda: compute_window(plain), repeats=1))
        with_mass = min(with_mass, best_time_s(lambda: compute_window(massive), repeats=1))
    added = with_mass / without - 1.0
    return [
        BenchLine(
            section="launch",
            name=f"{n} x {n} grid with mass metrics, launch site and minimum-mass limit, cold",
            value=with_mass,
            unit="s",
            baseline_value=without,
            ratio=without / with_mass,
            goal="mass adds <= 15 %",
            meets_goal=added <= 0.15,
            notes=f"baseline: the same grid without the mass and launch sections; mass adds "
            f"{added * 100:+.1f} % (best of 3 alternating runs each)",
        )
    ]


def _period(case):
    """(departure_jd_tdb, DLA, RLA, v-inf) of 21 consecutive days, from solved arcs."""
    from solver.window.cell import select_arc, solve_cell

    days = []
    start = case.departure_start_jd_tdb + 60.0
    for k in range(PERIOD_DAYS):
        arc = select_arc(solve_cell(case, start + k, start + 160.0))
        m = arc.metrics
        days.append((arc.departure_jd_tdb, m["dla_deg"], m["rla_deg"], m["vinf_departure_km_s"]))
    return days


def sampled_window_minutes(site, day_jd_utc: float, dla_deg: float, rla_deg: float) -> float:
    """The baseline: minutes of the day's window found by testing every second (same Earth
    model as the solver: the day's intermediate frame turned at the Earth Rotation Angle)."""
    from solver.launch.daily_window import OMEGA_RAD_PER_DAY, asymptote_of_date, unit_vector_icrf

    delta, alpha, era0 = asymptote_of_date(day_jd_utc, unit_vector_icrf(dla_deg, rla_deg))
    tau = np.arange(86400) / 86400.0
    phi = math.radians(site.latitude_deg)
    lon = math.radians(site.longitude_deg) + era0 + OMEGA_RAD_PER_DAY * tau
    r = np.stack(
        [
            math.cos(phi) * np.cos(lon),
            math.cos(phi) * np.sin(lon),
            np.full_like(lon, math.sin(phi)),
        ],
        axis=1,
    )
    s = np.array(
        [math.cos(delta) * math.cos(alpha), math.cos(delta) * math.sin(alpha), math.sin(delta)]
    )
    east = np.stack([-np.sin(lon), np.cos(lon), np.zeros_like(lon)], axis=1)
    north = np.cross(r, east)
    count = 0
    for sense in (1.0, -1.0):
        v = np.cross(sense * np.cross(r, s), r)
        az = np.degrees(np.arctan2((v * east).sum(1), (v * north).sum(1)))
        count += int(site.azimuth_allowed(az).sum())
    return count / 60.0


def _window_lines() -> list[BenchLine]:
    from app.samples import load
    from solver.window.arc_launch import departure_day_jd_utc, launch_windows

    case = load("vesper_venus_orbiter")
    days = _period(case)
    launch_windows(case, days[:1])  # imports and ERFA loaded, not timed
    ours = best_time_s(lambda: launch_windows(case, days), repeats=5)
    reports = launch_windows(case, days)
    site = case.launch_site
    start = time.perf_counter()
    sampled = [sampled_window_minutes(site, departure_day_jd_utc(d[0]), d[1], d[2]) for d in days]
    baseline = time.perf_counter() - start
    worst = max(abs(r.window.total_minutes - m) for r, m in zip(reports, sampled, strict=True))
    return [
        BenchLine(
            section="launch",
            name=f"daily launch windows of a {PERIOD_DAYS}-day launch period (case-level call)",
            value=ours * 1e3,
            unit="ms",
            baseline_value=baseline * 1e3,
            ratio=baseline / ours,
            goal="< 50 ms",
            meets_goal=ours < 0.050,
            notes="baseline: every second of each day tested with the same Earth model "
            f"(numpy); window lengths agree within {worst * 60:.1f} s a day",
        )
    ]


def run(size: str = "full") -> list[BenchLine]:
    from app.bench.grid_bench import SIZE_FULL, SIZE_QUICK

    return _grid_lines(SIZE_FULL if size == "full" else SIZE_QUICK) + _window_lines()
