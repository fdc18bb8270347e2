"""CPU time per request, in process: the mark list, a mark page and the nearby API, signed in as a viewer.

    .venv/bin/python benchmarks/bench_cpu.py [--tree before=/path/to/old/checkout --tree after=.]
        [--db-url postgres://postgres@127.0.0.1:5432/reg_infra_load] [--rounds 5] [--profile "mark page"]

The load benchmark (``bench_load.py``) measures requests per second, which on a shared machine moves
with whatever else runs. The CPU time a request costs in the serving process moves much less, so
this script measures that, for each source tree given, in its own process, against the same
database:

- production settings (``REGISTRY_PRODUCTION=1``: DEBUG off, cached templates, persistent
  connections), a viewer signed in with a session cookie;
- each request goes through Django's WSGI handler (middleware, session, view, template), with the
  same addresses as ``bench_load.py`` (the mark list; the first 100 marks' pages; the nearby API at
  those marks), one warm-up round first (the read cache filled, as it is under load), then
  ``--rounds`` rounds; the median and 90th percentile of ``time.process_time()`` per request, and
  the SQL queries of one request;
- ``--profile NAME`` prints the cProfile top functions (cumulative) for that endpoint instead.

Nothing here listens on a port; the data are whatever the database holds (``manage.py load_demo``).
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def _env(tree: Path, db_url: str) -> dict:
    env = dict(os.environ)
    env.update(
        {
            "REGISTRY_PRODUCTION": "1",
            "REGISTRY_SECRET_KEY": "bench-cpu-only-" + "x" * 40,
            "REGISTRY_ALLOWED_HOSTS": "localhost,127.0.0.1",
            "DATABASE_URL": db_url,
            "REGISTRY_SSL_REDIRECT": "0",
            "REGISTRY_SIGNING_KEY_SECRET": "bench-cpu-only-signing-secret-" + "y" * 20,
            "REGISTRY_PUBLIC_URL": "https://localhost",
            "REGISTRY_DATA_DIR": str(tree / "var"),
            "DJANGO_SETTINGS_MODULE": "registry.settings",
            "PYTHONPATH": str(tree),
        }
    )
    env.pop("REGISTRY_DB_RUNTIME_ROLE", None)
    return env


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--tree", action="append", default=[], help="label=path of a checkout (repeatable)")
    ap.add_argument("--db-url", default="postgres://postgres@127.0.0.1:5432/reg_infra_load")
    ap.add_argument("--rounds", type=int, default=5)
    ap.add_argument("--profile", default="", help="endpoint to profile: 'mark list', 'mark page' or 'nearby API'")
    ap.add_argument("--sql", action="store_true", help="print the SQL of one request of each endpoint (stderr)")
    ap.add_argument("--worker", action="store_true", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker:
        worker(args)
        return
    trees = [t.split("=", 1) for t in args.tree] or [["this", str(ROOT)]]
    results = {}
    for label, path in trees:
        tree = Path(path).resolve()
        cmd = [str(tree / ".venv" / "bin" / "python"), str(Path(__file__).resolve()), "--worker"]
        cmd += ["--rounds", str(args.rounds), "--profile", args.profile] + (["--sql"] if args.sql else [])
        out = subprocess.run(cmd, cwd=tree, env=_env(tree, args.db_url), capture_output=True, text=True)
        if out.returncode or args.sql:
            sys.stderr.write(out.stderr)
        if out.returncode:
            raise SystemExit(f"{label}: the worker failed")
        if args.profile:
            print(f"== {label}: {args.profile}")
            print(out.stdout)
            continue
        results[label] = json.loads(out.stdout.strip().splitlines()[-1])
    if args.profile:
        return
    print(f"CPU ms per request in process (production settings, viewer, read cache warm); {args.rounds} rounds")
    print(f"{'tree':<10}{'endpoint':<14}{'median ms':>10}{'p90 ms':>9}{'queries':>9}  statuses")
    for label, r in results.items():
        for name, e in r["endpoints"].items():
            print(f"{label:<10}{name:<14}{e['median_ms']:>10.2f}{e['p90_ms']:>9.2f}{e['queries']:>9}  {e['statuses']}")
    if len(results) == 2:
        (a, ra), (b, rb) = results.items()
        for name in ra["endpoints"]:
            ratio = ra["endpoints"][name]["median_ms"] / max(rb["endpoints"][name]["median_ms"], 1e-9)
            print(f"{name}: CPU per request {a} / {b} = {ratio:.2f}x")
    print(f"1-minute load average ({os.cpu_count()} CPUs): {os.getloadavg()[0]:.1f}")
    print()
    print(json.dumps(results, indent=2))


# ----------------------------------------------------------------------------- worker


def _targets():
    from importlib import import_module

    from django.conf import settings
    from django.contrib.auth import BACKEND_SESSION_KEY, HASH_SESSION_KEY, SESSION_KEY, get_user_model
    from django.contrib.auth.models import Group

    from registry.models import Mark

    User = get_user_model()
    user, _ = User.objects.get_or_create(username="bench-cpu-viewer")
    user.groups.set([Group.objects.get(name="viewer")])
    s = import_module(settings.SESSION_ENGINE).SessionStore()  # the tree's own engine and table
    s[SESSION_KEY] = str(user.pk)
    s[BACKEND_SESSION_KEY] = settings.AUTHENTICATION_BACKENDS[0]  # as a sign-in through the form
    s[HASH_SESSION_KEY] = user.get_session_auth_hash()
    s.create()
    marks = list(
        Mark.objects.exclude(search_lat_deg=None)
        .order_by("code")
        .values_list("code", "search_lat_deg", "search_lon_deg")[:100]
    )
    mark_paths = [f"/marks/{code}/" for code, _, _ in marks]
    near_paths = [f"/api/marks/near/?lat={lat:.6f}&lon={lon:.6f}&radius_km=5&limit=20" for _, lat, lon in marks]
    return s.session_key, {"mark list": ["/marks/"], "mark page": mark_paths, "nearby API": near_paths}


def worker(args) -> None:
    import time
    from io import BytesIO

    import django

    django.setup()
    from django.core.handlers.wsgi import WSGIHandler
    from django.db import connection

    session, endpoints = _targets()
    handler = WSGIHandler()

    def call(path: str) -> int:
        p, _, qs = path.partition("?")
        environ = {
            "REQUEST_METHOD": "GET",
            "PATH_INFO": p,
            "QUERY_STRING": qs,
            "SERVER_NAME": "localhost",
            "SERVER_PORT": "443",
            "HTTP_HOST": "localhost",
            "HTTP_COOKIE": f"sessionid={session}",
            "HTTP_ACCEPT": "text/html,application/json",
            "HTTP_X_FORWARDED_PROTO": "https",
            "REMOTE_ADDR": "127.0.0.1",
            "wsgi.url_scheme": "https",
            "wsgi.input": BytesIO(b""),
            "wsgi.errors": sys.stderr,
            "wsgi.version": (1, 0),
            "wsgi.multithread": False,
            "wsgi.multiprocess": True,
            "wsgi.run_once": False,
        }
        status = []
        body = handler(environ, lambda s, h, exc_info=None: status.append(s))
        for _ in body:
            pass
        if hasattr(body, "close"):
            body.close()
        return int(status[0].split()[0])

    if args.profile:
        import cProfile
        import pstats

        paths = endpoints[args.profile]
        for p in paths:
            call(p)
        prof = cProfile.Profile(time.process_time)  # CPU time: waits on the database do not count
        prof.enable()
        for _ in range(args.rounds):
            for p in paths:
                call(p)
        prof.disable()
        stats = pstats.Stats(prof, stream=sys.stdout)
        stats.sort_stats("cumulative").print_stats(int(os.environ.get("BENCH_PROFILE_LINES", "45")))
        stats.sort_stats("tottime").print_stats(30)
        return

    out = {}
    for name, paths in endpoints.items():
        statuses: dict[int, int] = {}
        for p in paths:  # warm-up: templates compiled, read cache filled
            call(p)
        queries: list[str] = []

        def record(execute, sql, params, many, context, queries=queries):
            queries.append(sql)
            return execute(sql, params, many, context)

        with connection.execute_wrapper(record):
            call(paths[0])
        if args.sql:
            sys.stderr.write(f"-- {name}: {len(queries)} queries\n" + "".join(f"  {q[:300]}\n" for q in queries))
        ms = []
        for _ in range(args.rounds):
            for p in paths:
                t0 = time.process_time()
                code = call(p)
                ms.append((time.process_time() - t0) * 1000.0)
                statuses[code] = statuses.get(code, 0) + 1
        ms.sort()
        out[name] = {
            "median_ms": statistics.median(ms),
            "p90_ms": ms[int(0.9 * (len(ms) - 1))],
            "queries": len(queries),
            "statuses": {str(k): v for k, v in statuses.items()},
        }
    print(json.dumps({"endpoints": out}))


if __name__ == "__main__":
    main()
