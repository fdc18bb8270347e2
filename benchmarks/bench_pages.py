"""Benchmark: list pages, API pages, code search and free-text filter on a large registry.

    .venv/bin/python benchmarks/bench_pages.py [--marks 1000000] [--sqlite-marks 100000]
        [--backend both|postgis|sqlite] [--reload] [--repeat 15]
        [--pg-url postgres://postgres@127.0.0.1:5432/reg_infra_bench]
        [--sqlite-path var/bench/pages.sqlite3]

What it does, in one run (each backend in its own process, Django settings being per process):

1. Loads synthetic marks once into a separate benchmark database (PostgreSQL: created and
   migrated here, rows loaded with ``COPY``; SQLite: a file under ``var/bench/``). The data are
   invented: codes ``BM0000000``…, names made of a few invented place words and a number,
   markings and keepers from small invented lists, 92 % active, 5 % retired, 3 % destroyed.
   ``--reload`` starts over; otherwise an existing database with the right count is reused
   (and migrated, so new indexes are built on it).
2. Signs in as a viewer with Django's test client and times each request (server time as seen
   by the test client: URL resolution, middleware, queries, template): the median and the
   slowest of ``--repeat`` runs after one warm-up, the median CPU time of this process (the
   server's Python work, which moves less with the machine's load than the wall clock), and the
   number of SQL queries. The cache is
   emptied before each timed request, so the figures are those of the reads themselves, not of
   the registry's read cache (``registry.selectors.read_cache``).

The figures the issue asks for: the mark list's first page, a deep page (by page number and by
the cursor link the page offers), the last page, a code search that starts with / contains a
string in any case, the free-text filter, and the API list at a deep offset and by cursor.
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
SEED = 20261204
PLACES = [
    "Alder",
    "Basin",
    "Cedar",
    "Dunmore",
    "Eastfork",
    "Fallow",
    "Granite",
    "Harrow",
    "Ironwood",
    "Juniper",
    "Kestrel",
    "Larch",
    "Millbrook",
    "Northgate",
    "Oxbow",
    "Pinecrest",
    "Quarry",
    "Ridgeway",
    "Stonebridge",
    "Tamarack",
    "Upland",
    "Valleyview",
    "Westcott",
    "Yarrow",
    "Zephyr",
    "Bluff",
    "Canyon",
    "Mesa",
    "Butte",
    "Creek",
]
KINDS = ["Hill", "Tank", "Bridge", "Road", "Church", "School", "Water Tower", "Summit", "Junction", "Dam"]
KEEPERS = [
    "County roads office",
    "Valley irrigation district",
    "Town public works",
    "State parks unit",
    "Private landowner",
    "Rail corridor trust",
    "Water board",
    "University field station",
]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--marks", type=int, default=1_000_000, help="marks in the PostgreSQL database")
    ap.add_argument("--sqlite-marks", type=int, default=100_000, help="marks in the SQLite database")
    ap.add_argument("--backend", choices=["both", "postgis", "sqlite"], default="both")
    ap.add_argument("--reload", action="store_true")
    ap.add_argument("--load-only", action="store_true")
    ap.add_argument("--repeat", type=int, default=15)
    ap.add_argument("--only", default="", help="run only the requests whose label contains this text")
    ap.add_argument("--pg-url", default="postgres://postgres@127.0.0.1:5432/reg_infra_bench")
    ap.add_argument("--sqlite-path", default=str(ROOT / "var" / "bench" / "pages.sqlite3"))
    ap.add_argument("--worker", action="store_true", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker:
        print(json.dumps(worker(args)))
        return

    results = {}
    backends = ["postgis", "sqlite"] if args.backend == "both" else [args.backend]
    for backend in backends:
        env = dict(os.environ)
        n = args.marks
        if backend == "postgis":
            ensure_pg_database(args.pg_url)
            env["DATABASE_URL"] = args.pg_url
        else:
            n = args.sqlite_marks
            Path(args.sqlite_path).parent.mkdir(parents=True, exist_ok=True)
            env["DATABASE_URL"] = f"sqlite:///{Path(args.sqlite_path).resolve()}"
        env.pop("REGISTRY_PRODUCTION", None)
        cmd = [sys.executable, __file__, "--worker", "--backend", backend, "--marks", str(n)]
        cmd += ["--repeat", str(args.repeat), "--only", args.only] + (["--reload"] if args.reload else [])
        cmd += ["--load-only"] if args.load_only else []
        out = subprocess.run(cmd, env=env, cwd=ROOT, check=True, capture_output=True, text=True)
        sys.stderr.write(out.stderr)
        results[backend] = json.loads(out.stdout.strip().splitlines()[-1])

    if args.load_only:
        print(json.dumps(results, indent=2))
        return
    print()
    for backend, r in results.items():
        print(f"{backend}: {r['marks']:,} marks, viewer, Django test client; {args.repeat} runs each")
        print(f"  {'request':<58}{'median ms':>10}{'max ms':>9}{'CPU ms':>8}{'queries':>9}{'rows':>6}{'load':>6}")
        for label, t in r["timings"].items():
            print(
                f"  {label:<58}{t['median_ms']:>10.1f}{t['max_ms']:>9.1f}{t['cpu_ms']:>8.1f}{t['queries']:>9}{t['rows']:>6}"
                f"{t['load_1min']:>6.1f}"
            )
        print(f"  1-minute load average at the end ({os.cpu_count()} CPUs): {r['load_average_1min']:.1f}")
        print()
    print(json.dumps(results, indent=2))


# ----------------------------------------------------------------------------- worker


def _rows(n: int):
    from registry.models import Mark

    rng = np.random.default_rng(SEED)
    lat = rng.uniform(41.0, 49.0, n)
    lon = rng.uniform(-117.0, -104.0, n)
    place = rng.integers(0, len(PLACES), n)
    kind = rng.integers(0, len(KINDS), n)
    keeper = rng.integers(0, len(KEEPERS), n)
    status_draw = rng.random(n)
    now = dt.datetime.now(dt.UTC)
    fields = [f for f in Mark._meta.concrete_fields if not f.primary_key]
    columns = [f.column for f in fields]
    fixed = {f.name: f.get_default() for f in fields}
    fixed["created_at"] = fixed["updated_at"] = now

    def gen():
        for i in range(n):
            values = dict(fixed)
            values["code"] = f"BM{i:07d}"
            values["name"] = f"{PLACES[place[i]]} {KINDS[kind[i]]} {i % 997}"
            values["marking"] = f"{PLACES[place[i]][:4].upper()} {i % 10_000:04d} {1950 + i % 70}"
            values["keeper"] = KEEPERS[keeper[i]]
            s = status_draw[i]
            values["status"] = "active" if s < 0.92 else ("retired" if s < 0.97 else "destroyed")
            values["search_lat_deg"] = float(lat[i])
            values["search_lon_deg"] = float(lon[i])
            yield [values[f.name] for f in fields]

    return columns, gen()


def _load(n: int, vendor: str) -> float:
    t0 = time.perf_counter()
    columns, rows = _rows(n)
    load_mark_rows(columns, rows, vendor, pg_analyze="VACUUM ANALYZE registry_mark")
    return time.perf_counter() - t0


def _count() -> int:
    from django.db import connection

    with connection.cursor() as cur:
        cur.execute("SELECT COUNT(*) FROM registry_mark")
        return int(cur.fetchone()[0])


def _cases(client, n: int) -> list[tuple[str, str]]:
    """(label, URL); the cursor URLs are taken from the links the pages themselves give."""

    deep_page = max(1, (n * 95 // 100) // 50)
    deep_code = f"BM{n * 95 // 100:07d}"
    cases = [
        ("mark list, first page", "/marks/"),
        ("mark list, page 1,000 (?page=)", "/marks/?page=1000"),
        (f"mark list, page {deep_page:,} (?page=)", f"/marks/?page={deep_page}"),
    ]
    body = client.get("/marks/").content.decode()
    if "last=1" in body:  # the list offers keyset links (after/before a code, the last page)
        cases.append((f"mark list, the page after {deep_code} (?after=)", f"/marks/?after={deep_code}"))
        cases.append((f"mark list, the page before {deep_code} (?before=)", f"/marks/?before={deep_code}"))
        cases.append(("mark list, last page (?last=1)", "/marks/?last=1"))
        cases.append(("mark list, ?q=BM0 page after BM0950000", "/marks/?q=BM0&after=BM0950000"))
    cases += [
        ("code search ?q=BM0500 (starts with)", "/marks/?q=BM0500"),
        ("code search ?q=bm0500 (starts with, lower case)", "/marks/?q=bm0500"),
        ("code search ?q=0500&match=contains", "/marks/?q=0500&match=contains"),
        ("code search ?q=stonebridge&match=contains (rare)", "/marks/?q=eastfork+dam+99&match=contains"),
        ("free text ?text=granite tower", "/marks/?text=granite+tower"),
        ("free text ?text=irrigation 1234", "/marks/?text=irrigation+1234"),
        ("free text ?text=zzzz (no match)", "/marks/?text=zzzz"),
        ("API /api/marks/?limit=50", "/api/marks/?limit=50"),
        ("API /api/marks/?limit=50&offset=900000", f"/api/marks/?limit=50&offset={n * 9 // 10}"),
        ("API /api/marks/?q=BM0500&limit=50", "/api/marks/?q=BM0500&limit=50"),
    ]
    api = client.get("/api/marks/?limit=50").json()
    if "cursor=" in (api.get("next") or ""):
        # The cursor of a deep page: the same encoding as the next links, made for the deep code.
        from registry.selectors.paging import encode_cursor

        cases.append(
            (f"API by cursor after {deep_code} (next link)", f"/api/marks/?limit=50&cursor={encode_cursor(deep_code)}")
        )
        cases.append(
            (
                "API ?q=BM05 by cursor after BM0550000",
                f"/api/marks/?q=BM05&limit=50&cursor={encode_cursor('BM0550000')}",
            )
        )
    cases.append(("mark page /marks/BM0500000/", f"/marks/BM{n // 2:07d}/"))
    return cases


def worker(args) -> dict:
    os.environ.setdefault("DJANGO_SETTINGS_MODULE", "registry.settings")
    sys.path.insert(0, str(ROOT))
    import django

    django.setup()
    from django.contrib.auth import get_user_model
    from django.contrib.auth.models import Group
    from django.core.management import call_command
    from django.db import connection, reset_queries
    from django.test import Client
    from django.test.utils import CaptureQueriesContext

    vendor = connection.vendor
    call_command("migrate", verbosity=0)
    load_s = None
    have = _count()
    if args.reload or have != args.marks:
        sys.stderr.write(f"[{args.backend}] loading {args.marks:,} marks …\n")
        load_s = _load(args.marks, vendor)
        sys.stderr.write(f"[{args.backend}] loaded in {load_s:.1f} s\n")
    if args.load_only:
        return {"vendor": vendor, "marks": _count(), "load_s": load_s}

    from registry.roles import ensure_roles

    ensure_roles()
    User = get_user_model()
    user, _ = User.objects.get_or_create(username="bench-viewer")
    user.groups.set([Group.objects.get(name="viewer")])
    client = Client(HTTP_HOST="localhost")
    client.force_login(user)

    from django.core.cache import cache

    timings = {}
    for label, url in _cases(client, args.marks):
        if args.only and args.only not in label:
            continue
        client.get(url)  # warm-up
        ms = []
        cpu = []
        for _ in range(args.repeat):
            cache.clear()  # the registry's read cache would answer a repeated request: time the real reads
            reset_queries()
            with CaptureQueriesContext(connection) as ctx:
                t0, c0 = time.perf_counter(), time.process_time()
                resp = client.get(url)
                ms.append((time.perf_counter() - t0) * 1000.0)
                cpu.append((time.process_time() - c0) * 1000.0)
        if resp.status_code != 200:
            sys.stderr.write(f"[{args.backend}] {url}: HTTP {resp.status_code}\n")
        body = resp.content.decode()
        rows = body.count('class="code"') if "/api/" not in url else len(resp.json().get("results", []))
        timings[label] = {
            "url": url,
            "status": resp.status_code,
            "median_ms": statistics.median(ms),
            "max_ms": max(ms),
            "cpu_ms": statistics.median(cpu),
            "load_1min": os.getloadavg()[0],
            "queries": len(ctx.captured_queries),
            "rows": rows,
        }
    return {
        "vendor": vendor,
        "marks": _count(),
        "load_s": load_s,
        "timings": timings,
        "load_average_1min": os.getloadavg()[0],
    }


if __name__ == "__main__":
    main()
