"""Benchmark: the 50 nearest marks within 20 km among 1,000,000 synthetic marks.

    .venv/bin/python benchmarks/bench_nearby.py [--marks 1000000] [--queries 300]
        [--backend both|postgis|sqlite] [--reload]
        [--pg-url postgres://postgres@127.0.0.1:5432/reg_bench] [--sqlite-path var/bench/nearby.sqlite3]

What it does, in one run:

1. Loads the synthetic marks once into a separate benchmark database (PostgreSQL:
   ``reg_bench``, created and migrated here, rows loaded with ``COPY``; SQLite: a file under
   ``var/bench/``, migrated, rows inserted in one transaction). ``--reload`` starts over.
   The data are invented (uniform random points over a fictional 8° × 13° region around
   45°N 110.5°W, about 1.1 marks per km²) and never committed.
2. Times ``registry.selectors.nearby.marks_near(radius_m=20 000, limit=50)`` end to end
   (SQL, exact GRS80 distances, Mark instances) at random points: median and 90th percentile
   in ms, after a warm-up. On PostgreSQL both the PostGIS path and the portable path.
3. Times the brute force it replaces, in the same process: all 1,000,000 exact geodesic
   distances with pyproj on numpy arrays plus an ``argpartition`` for the 50 nearest (and,
   for scale, a spherical haversine in plain numpy, which is faster but not exact), with
   the coordinates already in memory. Prints the ratios.
4. Checks on the first queries that the search returns exactly the brute-force answer.

Each backend runs in its own process (Django settings are per process).
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
from benchcommon import ensure_pg_database, load_mark_rows

ROOT = Path(__file__).resolve().parent.parent
REGION = {"lat_min": 41.0, "lat_max": 49.0, "lon_min": -117.0, "lon_max": -104.0}
RADIUS_M = 20_000.0
LIMIT = 50
SEED = 20260601


# ----------------------------------------------------------------------------- orchestrator


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--marks", type=int, default=1_000_000)
    ap.add_argument("--queries", type=int, default=300)
    ap.add_argument("--backend", choices=["both", "postgis", "sqlite"], default="both")
    ap.add_argument("--reload", action="store_true")
    ap.add_argument("--pg-url", default="postgres://postgres@127.0.0.1:5432/reg_bench")
    ap.add_argument("--sqlite-path", default=str(ROOT / "var" / "bench" / "nearby.sqlite3"))
    ap.add_argument("--worker", action="store_true", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker:
        print(json.dumps(worker(args)))
        return

    results = {}
    backends = ["postgis", "sqlite"] if args.backend == "both" else [args.backend]
    for backend in backends:
        env = dict(os.environ)
        if backend == "postgis":
            ensure_pg_database(args.pg_url)
            env["DATABASE_URL"] = args.pg_url
        else:
            Path(args.sqlite_path).parent.mkdir(parents=True, exist_ok=True)
            env["DATABASE_URL"] = f"sqlite:///{Path(args.sqlite_path).resolve()}"
        cmd = [sys.executable, __file__, "--worker", "--backend", backend, "--marks", str(args.marks)]
        cmd += ["--queries", str(args.queries)] + (["--reload"] if args.reload else [])
        out = subprocess.run(cmd, env=env, cwd=ROOT, check=True, capture_output=True, text=True)
        sys.stderr.write(out.stderr)
        results[backend] = json.loads(out.stdout.strip().splitlines()[-1])

    print()
    print(f"Nearest {LIMIT} within {RADIUS_M / 1000:.0f} km among {args.marks:,} marks; {args.queries} random points")
    print(
        f"{'backend / path':<28}{'median ms':>11}{'p90 ms':>9}{'client CPU ms':>15}"
        f"{'exact brute ms':>16}{'ratio':>9}{'haversine ms':>14}{'ratio':>8}  agree"
    )
    for backend, r in results.items():
        for path, t in r["paths"].items():
            print(
                f"{backend + ' / ' + path:<28}{t['median_ms']:>11.2f}{t['p90_ms']:>9.2f}"
                f"{t['client_cpu_median_ms']:>15.2f}"
                f"{r['brute_exact_ms']:>16.1f}{r['brute_exact_ms'] / t['median_ms']:>8.0f}×"
                f"{r['brute_haversine_ms']:>14.1f}{r['brute_haversine_ms'] / t['median_ms']:>7.0f}×"
                f"  {t['agree']}/{t['checked']}"
            )
    loads = ", ".join(f"{b} {r['load_average_1min']:.1f}" for b, r in results.items())
    print(f"1-minute load average at the end of each run ({os.cpu_count()} CPUs): {loads}")
    print()
    print(json.dumps(results, indent=2))


# ----------------------------------------------------------------------------- worker


def _synthetic(n: int):
    rng = np.random.default_rng(SEED)
    lat = rng.uniform(REGION["lat_min"], REGION["lat_max"], n)
    lon = rng.uniform(REGION["lon_min"], REGION["lon_max"], n)
    return lat, lon


def _rows(n: int):
    """(columns, row iterator) for registry_mark, every column from the model (defaults for the rest)."""
    from registry.models import Mark

    lat, lon = _synthetic(n)
    now = dt.datetime.now(dt.UTC)
    fields = [f for f in Mark._meta.concrete_fields if not f.primary_key]
    columns = [f.column for f in fields]
    fixed = {}
    for f in fields:
        if f.name in ("created_at", "updated_at"):
            fixed[f.name] = now
        elif f.name not in ("code", "search_lat_deg", "search_lon_deg"):
            fixed[f.name] = f.get_default()

    def gen():
        for i in range(n):
            row = []
            for f in fields:
                if f.name == "code":
                    row.append(f"BM{i:07d}")
                elif f.name == "search_lat_deg":
                    row.append(float(lat[i]))
                elif f.name == "search_lon_deg":
                    row.append(float(lon[i]))
                else:
                    row.append(fixed[f.name])
            yield row

    return columns, gen()


def _load(n: int, vendor: str) -> float:
    from django.core.management import call_command

    t0 = time.perf_counter()
    call_command("migrate", verbosity=0)
    columns, rows = _rows(n)
    load_mark_rows(columns, rows, vendor)
    return time.perf_counter() - t0


def _count() -> int:
    from django.db import connection

    with connection.cursor() as cur:
        cur.execute("SELECT COUNT(*) FROM registry_mark WHERE search_lat_deg IS NOT NULL")
        return int(cur.fetchone()[0])


def _haversine_m(lat0, lon0, lat, lon, r_m=6_371_008.8):
    p0, p = np.radians(lat0), np.radians(lat)
    dphi = p - p0
    dlmb = np.radians(lon - lon0)
    a = np.sin(dphi / 2) ** 2 + np.cos(p0) * np.cos(p) * np.sin(dlmb / 2) ** 2
    return 2 * r_m * np.arcsin(np.sqrt(a))


def worker(args) -> dict:
    os.environ.setdefault("DJANGO_SETTINGS_MODULE", "registry.settings")
    sys.path.insert(0, str(ROOT))
    import django

    django.setup()
    import pyproj
    from django.db import connection

    from registry.selectors.nearby import marks_near

    vendor = connection.vendor
    load_s = None
    try:
        have = _count()
    except Exception:  # no table yet: a fresh database
        have = -1
    if args.reload or have != args.marks:
        sys.stderr.write(f"[{args.backend}] loading {args.marks:,} marks …\n")
        load_s = _load(args.marks, vendor)
        sys.stderr.write(f"[{args.backend}] loaded in {load_s:.1f} s\n")

    with connection.cursor() as cur:
        cur.execute("SELECT code, search_lat_deg, search_lon_deg FROM registry_mark WHERE search_lat_deg IS NOT NULL")
        rows = cur.fetchall()
    codes = np.array([r[0] for r in rows])
    all_lat = np.array([r[1] for r in rows], dtype=float)
    all_lon = np.array([r[2] for r in rows], dtype=float)
    geod = pyproj.Geod(ellps="GRS80")

    rng = np.random.default_rng(12345)
    margin = 0.5
    q_lat = rng.uniform(REGION["lat_min"] + margin, REGION["lat_max"] - margin, args.queries + 20)
    q_lon = rng.uniform(REGION["lon_min"] + margin, REGION["lon_max"] - margin, args.queries + 20)

    def brute(lat, lon):
        n = all_lat.size
        _, _, d = geod.inv(np.full(n, lon), np.full(n, lat), all_lon, all_lat)
        idx = np.argpartition(d, LIMIT)[: LIMIT * 2]
        idx = idx[d[idx] <= RADIUS_M]
        return [codes[i] for i in sorted(idx, key=lambda i: (d[i], codes[i]))][:LIMIT]

    paths = ["postgis", "portable"] if vendor == "postgresql" else ["portable"]
    timings = {}
    for path in paths:
        for i in range(20):  # warm-up
            marks_near(lat_deg=q_lat[i], lon_deg=q_lon[i], radius_m=RADIUS_M, limit=LIMIT, path=path)
        ms = []
        cpu_ms = []
        agree = checked = 0
        for i in range(20, 20 + args.queries):
            t0 = time.perf_counter()
            c0 = time.process_time()
            found = marks_near(lat_deg=q_lat[i], lon_deg=q_lon[i], radius_m=RADIUS_M, limit=LIMIT, path=path)
            cpu_ms.append((time.process_time() - c0) * 1000.0)
            ms.append((time.perf_counter() - t0) * 1000.0)
            if checked < 10:
                checked += 1
                agree += [m.code for m in found] == brute(q_lat[i], q_lon[i])
        timings[path] = {
            "median_ms": statistics.median(ms),
            "p90_ms": float(np.percentile(ms, 90)),
            "client_cpu_median_ms": statistics.median(cpu_ms),
            "agree": agree,
            "checked": checked,
        }

    exact, hav = [], []
    for i in range(7):
        t0 = time.perf_counter()
        n = all_lat.size
        _, _, d = geod.inv(np.full(n, q_lon[i]), np.full(n, q_lat[i]), all_lon, all_lat)
        np.argpartition(d, LIMIT)
        exact.append((time.perf_counter() - t0) * 1000.0)
        t0 = time.perf_counter()
        d = _haversine_m(q_lat[i], q_lon[i], all_lat, all_lon)
        np.argpartition(d, LIMIT)
        hav.append((time.perf_counter() - t0) * 1000.0)
    return {
        "vendor": vendor,
        "marks": int(all_lat.size),
        "load_s": load_s,
        "paths": timings,
        "brute_exact_ms": statistics.median(exact),
        "brute_haversine_ms": statistics.median(hav),
        "python": sys.version.split()[0],
        "cpus": os.cpu_count(),
        "load_average_1min": os.getloadavg()[0],
    }


if __name__ == "__main__":
    main()
