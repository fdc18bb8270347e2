"""Benchmark: vectorised geodesy on 1,000,000 points, and the plain Python loop it replaces.

    .venv/bin/python benchmarks/bench_geodesy.py [--points 1000000] [--runs 5] [--loop-sample 2000] [--json]

Measures, on invented points (uniform random over a fictional 3° × 5° area around 45.2°N 110.6°W,
inside UTM zone 12N; heights 500–3500 m):

1. **geodetic → grid with factors**: ``registry.geodesy.grid.to_grid`` (easting, northing, point scale
   factor, convergence; PROJ) plus ``elevation_factor`` (R = √(ρν)) and ``combined_factor``, for
   NAD83(2011) (EPSG:6319) on NAD83(2011) / UTM 12N (EPSG:6341).
2. **frame + epoch change**: ``registry.geodesy.frames.transform_position`` from ITRF2020 (EPSG:9989)
   @ 2024.5 to NAD83(2011) (EPSG:6319) @ 2010.0, (a) without velocities (frame change at 2024.5,
   hold with σ inflation) and (b) with a per-point velocity (propagation in ITRF2020, then the frame
   change at 2010.0).
3. **geodetic → ECEF → geodetic** round trip (pure numpy).

Each vectorised figure is the median of ``--runs`` runs over all points. The loop figure calls the
same public functions one point at a time (scalars) on ``--loop-sample`` points and is extrapolated
per point; the ratio is vectorised points/s ÷ loop points/s. Nothing here is a pass/fail test.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import statistics
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from registry.geodesy.conversions import ecef_to_geodetic, geodetic_to_ecef  # noqa: E402
from registry.geodesy.frames import transform_position  # noqa: E402
from registry.geodesy.grid import combined_factor, elevation_factor, to_grid  # noqa: E402
from registry.geodesy.projsetup import configure_proj  # noqa: E402


def points(n: int, seed: int = 20240601):
    rng = np.random.default_rng(seed)
    lat = rng.uniform(43.7, 46.7, n)
    lon = rng.uniform(-113.1, -108.1, n)
    h = rng.uniform(500.0, 3500.0, n)
    return lat, lon, h


def grid_with_factors(lat, lon, h):
    g = to_grid(lat, lon, frame_epsg=6319, grid=6341)
    ef = elevation_factor(h, lat_deg=lat)
    cf = combined_factor(g.scale_factor, ef)
    return g.easting_m, g.northing_m, g.scale_factor, g.convergence_deg, ef, cf


def frame_epoch(lat, lon, h, velocity=None):
    r = transform_position(
        lat, lon, h, from_epsg=9989, from_epoch_yr=2024.5, to_epsg=6319, to_epoch_yr=2010.0, velocity_enu_m_yr=velocity
    )
    return r.lat_deg, r.lon_deg, r.h_m


def ecef_round_trip(lat, lon, h):
    return ecef_to_geodetic(*geodetic_to_ecef(lat, lon, h))


def time_vectorised(fn, args, runs: int) -> float:
    fn(*(_head(a, 1000) for a in args))  # warm caches (PROJ objects)
    times = []
    for _ in range(runs):
        t0 = time.perf_counter()
        fn(*args)
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def time_loop(fn, args, sample: int) -> float:
    """Seconds per point for a plain Python loop over the same function with scalar arguments."""
    cols = [_head(a, sample) for a in args]
    fn(*(_item(c, 0) for c in cols))
    t0 = time.perf_counter()
    for i in range(sample):
        fn(*(_item(c, i) for c in cols))
    return (time.perf_counter() - t0) / sample


def _head(a, k):
    if isinstance(a, np.ndarray):
        return a[:k]
    if isinstance(a, tuple):
        return tuple(v[:k] for v in a)
    return a


def _item(a, i):
    """Element i as Python floats (a velocity tuple becomes a tuple of floats)."""
    if isinstance(a, np.ndarray):
        return float(a[i])
    if isinstance(a, tuple):
        return tuple(float(v[i]) for v in a)
    return a


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--points", type=int, default=1_000_000)
    p.add_argument("--runs", type=int, default=5)
    p.add_argument("--loop-sample", type=int, default=2000)
    p.add_argument("--json", action="store_true")
    opts = p.parse_args(argv)
    configure_proj(grid_dirs=[])
    n = opts.points
    lat, lon, h = points(n)
    rng = np.random.default_rng(7)
    vel = (rng.normal(-0.015, 0.002, n), rng.normal(-0.005, 0.002, n), rng.normal(0.0, 0.001, n))

    cases = [
        ("geodetic → grid (E, N, k, γ) + elevation and combined factors", grid_with_factors, (lat, lon, h)),
        ("frame + epoch: ITRF2020@2024.5 → NAD83(2011)@2010.0, no velocity", frame_epoch, (lat, lon, h)),
        ("frame + epoch: same, with per-point velocity", frame_epoch, (lat, lon, h, vel)),
        ("geodetic → ECEF → geodetic round trip", ecef_round_trip, (lat, lon, h)),
    ]
    results = []
    for name, fn, args in cases:
        seconds = time_vectorised(fn, args, opts.runs)
        per_point_loop = time_loop(fn, args, opts.loop_sample)
        rate = n / seconds
        loop_rate = 1.0 / per_point_loop
        results.append(
            {
                "case": name,
                "points": n,
                "median_s": round(seconds, 4),
                "points_per_s": round(rate),
                "loop_points_per_s": round(loop_rate),
                "ratio": round(rate / loop_rate, 1),
            }
        )
    machine = {
        "python": platform.python_version(),
        "numpy": np.__version__,
        "cpu_count": os.cpu_count(),
        "processor": platform.processor() or platform.machine(),
    }
    import pyproj

    machine["pyproj"] = pyproj.__version__
    machine["proj"] = pyproj.proj_version_str
    if opts.json:
        print(json.dumps({"machine": machine, "results": results}, indent=2, ensure_ascii=False))
        return 0
    print(f"{n:,} points, median of {opts.runs} runs; loop over {opts.loop_sample:,} points, extrapolated")
    print(f"machine: {machine}")
    print(f"{'case':<68} {'median s':>9} {'points/s':>12} {'loop pts/s':>11} {'ratio':>7}")
    for r in results:
        print(
            f"{r['case']:<68} {r['median_s']:>9.3f} {r['points_per_s']:>12,} {r['loop_points_per_s']:>11,} {r['ratio']:>6.1f}×"
        )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
