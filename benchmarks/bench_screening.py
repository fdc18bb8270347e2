"""Benchmark of the RTK screening core: 1,000 candidate bases over a 10,000-point site grid.

    .venv/bin/python benchmarks/bench_screening.py [--repeat 15]

Pure computation (no database): ``registry.geodesy.site`` builds the grid over a ~4 km × 4 km
polygon near 45.2° N on its local transverse Mercator plane, candidates are projected onto it,
and ``registry.geodesy.rtk.screen_candidates`` computes every candidate's worst 95 % figures,
coverage, ranking, the best-achievable map and the best pair. Prints medians (and the planar
versus geodesic distance check the method relies on: pyproj Geod, GRS80).
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

import numpy as np
from pyproj import Geod

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from registry.geodesy.rtk import RtkErrorModel, screen_candidates  # noqa: E402
from registry.geodesy.site import LocalPlane, build_site_grid, parse_site_geojson, site_plane  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=15)
    parser.add_argument("--candidates", type=int, default=1000)
    args = parser.parse_args()

    rng = np.random.default_rng(2025)
    # An invented irregular site about 4 km across.
    p0 = LocalPlane(45.2, -110.6)
    ang = np.sort(rng.uniform(0, 2 * np.pi, 9))
    rad = rng.uniform(1600, 2300, 9)
    lat, lon = p0.to_geodetic_deg(rad * np.cos(ang), rad * np.sin(ang))
    ring = [[float(a), float(b)] for a, b in zip(lon, lat, strict=True)]
    site = parse_site_geojson({"type": "Polygon", "coordinates": [ring + [ring[0]]]})
    plane = site_plane(site)
    area = build_site_grid(site, plane).area_m2
    spacing = (area / 10_000) ** 0.5
    grid = build_site_grid(site, plane, spacing)
    k = args.candidates
    c_lat, c_lon = p0.to_geodetic_deg(rng.uniform(-12_000, 12_000, k), rng.uniform(-12_000, 12_000, k))
    terms = dict(
        base_h_mm=rng.uniform(2, 8, k),
        base_v_mm=rng.uniform(3, 12, k),
        drift_h_mm=rng.uniform(0, 10, k),
        drift_v_mm=rng.uniform(0, 10, k),
        usable=rng.random(k) > 0.2,
    )
    model = RtkErrorModel()

    def core():
        ce, cn = plane.to_local_m(c_lat, c_lon)
        return screen_candidates(
            grid.e_m,
            grid.n_m,
            grid.is_cell,
            ce,
            cn,
            model=model,
            tol_h_mm=30.0,
            tol_v_mm=45.0,
            max_baseline_m=10_000.0,
            **terms,
        )

    def with_grid():
        build_site_grid(site, plane, spacing)
        return core()

    for fn, label in (
        (core, "core: project 1,000 marks + screen over the grid"),
        (with_grid, "core + building the site grid"),
    ):
        fn()  # warm-up
        times = []
        for _ in range(args.repeat):
            t = time.perf_counter()
            result = fn()
            times.append(time.perf_counter() - t)
        print(
            f"{label:<52} median {statistics.median(times) * 1000:7.1f} ms  (min {min(times) * 1000:.1f}, "
            f"max {max(times) * 1000:.1f}; {k} candidates × {grid.e_m.size} points, of which {grid.n_cells} cells)"
        )
    print(
        f"  eligible candidates {int(result.eligible.sum())}, pair pool {result.info['pair_pool']}, "
        f"best pair coverage {result.pair_coverage:.3f}"
    )

    # The planar distances the core uses, against geodesics (pyproj Geod, GRS80), for 20,000 random pairs.
    i = rng.integers(0, k, 20_000)
    j = rng.integers(0, grid.e_m.size, 20_000)
    g_lat, g_lon = plane.to_geodetic_deg(grid.e_m[j], grid.n_m[j])
    ce, cn = plane.to_local_m(c_lat[i], c_lon[i])
    planar = np.hypot(ce - grid.e_m[j], cn - grid.n_m[j])
    _, _, geodesic = Geod(ellps="GRS80").inv(c_lon[i], c_lat[i], g_lon, g_lat)
    ok = geodesic > 100
    rel = np.abs(planar[ok] - geodesic[ok]) / geodesic[ok]
    print(
        f"planar vs geodesic distance (≤ {geodesic.max() / 1000:.1f} km): max relative difference {rel.max():.2e}, "
        f"max absolute {np.abs(planar - geodesic).max() * 1000:.1f} mm"
    )
    t = time.perf_counter()
    Geod(ellps="GRS80").inv(c_lon[i], c_lat[i], g_lon, g_lat)
    per_pair = (time.perf_counter() - t) / 20_000
    print(
        f"for comparison, geodesic inverses for all {k * grid.e_m.size:,} pairs would take ≈ "
        f"{per_pair * k * grid.e_m.size:.1f} s"
    )


if __name__ == "__main__":
    main()
