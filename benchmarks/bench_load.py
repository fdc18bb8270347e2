"""Load benchmark: gunicorn (2 workers) behind nginx in production mode, 50 signed-in clients, loopback only.

    .venv/bin/python benchmarks/bench_load.py [--tree before=/path/to/old/checkout --tree after=.]
        [--db-url postgres://postgres@127.0.0.1:5432/reg_infra_load] [--clients 50] [--seconds 20]
        [--rate 50] [--open-seconds 20] [--workers 2]

For each source tree given (default: this one), in one run against the same database:

1. starts gunicorn with ``deploy/gunicorn.conf.py`` (``REGISTRY_PRODUCTION=1``, 2 sync workers, on
   127.0.0.1:18001) and nginx (Debian's package) with a loopback copy of ``deploy/nginx``'s proxy
   settings on 127.0.0.1:18080 (no TLS here: nginx says ``X-Forwarded-Proto: https`` as the TLS
   front would);
2. signs a viewer in (a session made in the database, the cookie sent by every client);
3. closed loop: ``--clients`` connections (HTTP/1.1 keep-alive) each sending the next request as
   soon as the previous answer is in, for ``--seconds`` per endpoint: the mark list, a mark page
   (marks taken in turn), and the nearby API (points taken in turn). Prints requests/s and
   p50/p95/p99 latency;
4. open loop: requests started at a fixed ``--rate`` per second whatever the answers (a mix of the
   three), for ``--open-seconds``: p50/p95/p99 of the offered load.

Every request goes to 127.0.0.1, every loop is bounded in count and time, and the servers are
stopped at the end (also on error). The data are whatever the database holds (``manage.py
load_demo`` is enough: 184 invented marks).
"""

from __future__ import annotations

import argparse
import asyncio
import json
import os
import signal
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
APP_PORT = 18001
NGINX_PORT = 18080
HOST = "127.0.0.1"
#: Hard bounds of any loop here.
MAX_REQUESTS_PER_PHASE = 200_000
MAX_SECONDS_PER_PHASE = 120


def _percentile(values: list[float], q: float) -> float:
    if not values:
        return float("nan")
    s = sorted(values)
    k = min(len(s) - 1, max(0, int(round(q / 100.0 * (len(s) - 1)))))
    return s[k]


# ----------------------------------------------------------------------------- HTTP client


class Conn:
    """One keep-alive HTTP/1.1 connection to nginx on loopback."""

    def __init__(self, cookie: str):
        self.cookie = cookie
        self.reader = self.writer = None

    async def open(self):
        self.reader, self.writer = await asyncio.open_connection(HOST, NGINX_PORT)

    async def get(self, path: str) -> int:
        if self.writer is None:
            await self.open()
        req = (
            f"GET {path} HTTP/1.1\r\nHost: localhost\r\nCookie: {self.cookie}\r\n"
            "Accept: text/html,application/json\r\nConnection: keep-alive\r\n\r\n"
        )
        self.writer.write(req.encode())
        await self.writer.drain()
        status_line = await self.reader.readline()
        if not status_line:
            raise ConnectionError("closed")
        status = int(status_line.split()[1])
        length = None
        chunked = False
        close = False
        while True:
            line = await self.reader.readline()
            if line in (b"\r\n", b""):
                break
            name, _, value = line.decode("latin-1").partition(":")
            name = name.strip().lower()
            if name == "content-length":
                length = int(value.strip())
            elif name == "transfer-encoding" and "chunked" in value.lower():
                chunked = True
            elif name == "connection" and "close" in value.lower():
                close = True
        if chunked:
            while True:
                size = int((await self.reader.readline()).strip().split(b";")[0], 16)
                await self.reader.readexactly(size + 2)
                if size == 0:
                    break
        elif length:
            await self.reader.readexactly(length)
        if close:
            self.close()
        return status

    def close(self):
        if self.writer is not None:
            self.writer.close()
        self.reader = self.writer = None


async def closed_loop(paths: list[str], cookie: str, clients: int, seconds: float, min_requests: int = 0) -> dict:
    """``seconds`` of requests (and at least ``min_requests``, within the phase's hard bounds)."""
    latencies: list[float] = []
    statuses: dict[int, int] = {}
    errors = 0
    counter = 0
    start = time.perf_counter()
    deadline = start + min(seconds, MAX_SECONDS_PER_PHASE)
    hard_deadline = start + MAX_SECONDS_PER_PHASE

    def go_on() -> bool:
        now = time.perf_counter()
        return counter < MAX_REQUESTS_PER_PHASE and (now < deadline or (counter < min_requests and now < hard_deadline))

    async def client():
        nonlocal counter, errors
        conn = Conn(cookie)
        while go_on():
            path = paths[counter % len(paths)]
            counter += 1
            t0 = time.perf_counter()
            try:
                status = await conn.get(path)
            except (OSError, ConnectionError, asyncio.IncompleteReadError, ValueError, IndexError):
                errors += 1
                conn.close()
                continue
            latencies.append(time.perf_counter() - t0)
            statuses[status] = statuses.get(status, 0) + 1
        conn.close()

    t0 = time.perf_counter()
    await asyncio.gather(*(client() for _ in range(clients)))
    elapsed = time.perf_counter() - t0
    return _summary(latencies, statuses, errors, elapsed)


async def open_loop(paths: list[str], cookie: str, rate: float, seconds: float) -> dict:
    """Start one request every 1/rate s on a free connection (a new one if none is free)."""
    latencies: list[float] = []
    statuses: dict[int, int] = {}
    errors = 0
    idle: list[Conn] = []
    n = int(min(seconds, MAX_SECONDS_PER_PHASE) * rate)
    tasks = []

    async def one(path: str):
        nonlocal errors
        conn = idle.pop() if idle else Conn(cookie)
        t0 = time.perf_counter()
        try:
            status = await conn.get(path)
        except (OSError, ConnectionError, asyncio.IncompleteReadError, ValueError, IndexError):
            errors += 1
            conn.close()
            return
        latencies.append(time.perf_counter() - t0)
        statuses[status] = statuses.get(status, 0) + 1
        idle.append(conn)

    start = time.perf_counter()
    for i in range(min(n, MAX_REQUESTS_PER_PHASE)):
        wait = start + i / rate - time.perf_counter()
        if wait > 0:
            await asyncio.sleep(wait)
        tasks.append(asyncio.create_task(one(paths[i % len(paths)])))
    await asyncio.gather(*tasks)
    elapsed = time.perf_counter() - start
    for conn in idle:
        conn.close()
    return _summary(latencies, statuses, errors, elapsed)


def _summary(latencies, statuses, errors, elapsed) -> dict:
    ms = [v * 1000.0 for v in latencies]
    return {
        "requests": len(ms),
        "rps": len(ms) / elapsed if elapsed else 0.0,
        "p50_ms": _percentile(ms, 50),
        "p95_ms": _percentile(ms, 95),
        "p99_ms": _percentile(ms, 99),
        "mean_ms": statistics.fmean(ms) if ms else float("nan"),
        "statuses": {str(k): v for k, v in sorted(statuses.items())},
        "errors": errors,
    }


# ----------------------------------------------------------------------------- servers


NGINX_CONF = """
worker_processes 1;
pid {tmp}/nginx.pid;
error_log {tmp}/nginx-error.log warn;
events {{ worker_connections 1024; }}
http {{
    server_tokens off;
    access_log {tmp}/nginx-access.log;
    client_body_temp_path {tmp}/body;
    proxy_temp_path {tmp}/proxy;
    fastcgi_temp_path {tmp}/fastcgi;
    uwsgi_temp_path {tmp}/uwsgi;
    scgi_temp_path {tmp}/scgi;
    upstream registry_app {{
        server 127.0.0.1:{app_port};
        keepalive 16;
    }}
    server {{
        listen 127.0.0.1:{nginx_port};
        server_name localhost;
        location / {{
            proxy_pass http://registry_app;
            proxy_http_version 1.1;
            proxy_set_header Connection "";
            proxy_set_header Host $host;
            proxy_set_header X-Forwarded-For $proxy_add_x_forwarded_for;
            proxy_set_header X-Forwarded-Proto https;
            proxy_set_header X-Real-IP $remote_addr;
            proxy_redirect off;
            proxy_read_timeout 130s;
        }}
    }}
}}
"""


def _env(tree: Path, db_url: str, workers: int) -> dict:
    env = dict(os.environ)
    env.update(
        {
            "REGISTRY_PRODUCTION": "1",
            "REGISTRY_SECRET_KEY": "bench-load-only-" + "x" * 40,
            "REGISTRY_ALLOWED_HOSTS": "localhost,127.0.0.1",
            "DATABASE_URL": db_url,
            "REGISTRY_SSL_REDIRECT": "0",
            "REGISTRY_SIGNING_KEY_SECRET": "bench-load-only-signing-secret-" + "y" * 20,
            "REGISTRY_PUBLIC_URL": "https://localhost",
            "REGISTRY_GUNICORN_BIND": f"{HOST}:{APP_PORT}",
            "REGISTRY_GUNICORN_WORKERS": str(workers),
            "REGISTRY_GUNICORN_LOG_LEVEL": "warning",
            "REGISTRY_DATA_DIR": str(tree / "var"),
        }
    )
    env.pop("REGISTRY_DB_RUNTIME_ROLE", None)
    return env


def _wait_port(port: int, timeout_s: float = 60.0) -> None:
    import socket

    deadline = time.time() + timeout_s
    while time.time() < deadline:
        with socket.socket() as s:
            if s.connect_ex((HOST, port)) == 0:
                return
        time.sleep(0.2)
    raise RuntimeError(f"nothing listens on {HOST}:{port}")


def _session_and_targets(tree: Path, env: dict) -> dict:
    code = r"""
import json, django
django.setup()
from django.conf import settings
from django.contrib.auth import get_user_model, SESSION_KEY, BACKEND_SESSION_KEY, HASH_SESSION_KEY
from django.contrib.auth.models import Group
from importlib import import_module
from registry.models import Mark
User = get_user_model()
u, _ = User.objects.get_or_create(username="bench-load-viewer")
u.groups.set([Group.objects.get(name="viewer")])
s = import_module(settings.SESSION_ENGINE).SessionStore()  # the tree's own engine and table
s[SESSION_KEY] = str(u.pk)
s[BACKEND_SESSION_KEY] = settings.AUTHENTICATION_BACKENDS[0]  # as a sign-in through the form
s[HASH_SESSION_KEY] = u.get_session_auth_hash()
s.create()
marks = list(Mark.objects.exclude(search_lat_deg=None).order_by("code").values_list("code", "search_lat_deg", "search_lon_deg")[:100])
print(json.dumps({"session": s.session_key, "marks": marks}))
"""
    out = subprocess.run(
        [str(tree / ".venv" / "bin" / "python"), "-c", code],
        env=env | {"DJANGO_SETTINGS_MODULE": "registry.settings", "PYTHONPATH": str(tree)},
        cwd=tree,
        capture_output=True,
        text=True,
        check=True,
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def run_tree(label: str, tree: Path, args) -> dict:
    env = _env(tree, args.db_url, args.workers)
    subprocess.run(  # production serves hashed static names from the manifest
        [str(tree / ".venv" / "bin" / "python"), "manage.py", "collectstatic", "--noinput", "-v0"],
        cwd=tree,
        env=env,
        check=True,
    )
    info = _session_and_targets(tree, env)
    cookie = f"sessionid={info['session']}"
    marks = info["marks"]
    mark_paths = [f"/marks/{code}/" for code, _, _ in marks]
    near_paths = [f"/api/marks/near/?lat={lat:.6f}&lon={lon:.6f}&radius_km=5&limit=20" for _, lat, lon in marks]
    endpoints = {"mark list": ["/marks/"], "mark page": mark_paths, "nearby API": near_paths}
    tmp = Path(tempfile.mkdtemp(prefix="bench-load-"))
    (tmp / "nginx.conf").write_text(NGINX_CONF.format(tmp=tmp, app_port=APP_PORT, nginx_port=NGINX_PORT))
    log = open(tmp / "gunicorn.log", "w")
    gunicorn = subprocess.Popen(
        [str(tree / ".venv" / "bin" / "gunicorn"), "--config", str(tree / "deploy" / "gunicorn.conf.py")],
        cwd=tree,
        env=env,
        stdout=log,
        stderr=log,
        start_new_session=True,
    )
    nginx = None
    try:
        _wait_port(APP_PORT)
        nginx = subprocess.Popen(["nginx", "-c", str(tmp / "nginx.conf"), "-p", str(tmp), "-g", "daemon off;"])
        _wait_port(NGINX_PORT)
        result = {"tree": str(tree), "endpoints": {}}
        for name, paths in endpoints.items():
            # warm-up: every address served a few times, so that each worker has read it once (a read
            # cache being filled is not the steady state; bench_pages.py times the uncached reads)
            asyncio.run(closed_loop(paths, cookie, args.clients, 3, min_requests=4 * len(paths)))
            r = asyncio.run(closed_loop(paths, cookie, args.clients, args.seconds))
            result["endpoints"][name] = r
            sys.stderr.write(f"[{label}] {name}: {r['rps']:.0f} req/s p95 {r['p95_ms']:.0f} ms {r['statuses']}\n")
        mix = [p for group in zip(["/marks/"] * len(marks), mark_paths, near_paths, strict=False) for p in group]
        r = asyncio.run(open_loop(mix, cookie, args.rate, args.open_seconds))
        result["open_loop"] = r
        sys.stderr.write(f"[{label}] open loop {args.rate}/s: p95 {r['p95_ms']:.0f} ms {r['statuses']}\n")
        result["load_average_1min"] = os.getloadavg()[0]
        return result
    finally:
        if nginx is not None:
            nginx.send_signal(signal.SIGQUIT)
            try:
                nginx.wait(10)
            except subprocess.TimeoutExpired:
                nginx.kill()
        os.killpg(gunicorn.pid, signal.SIGTERM)
        try:
            gunicorn.wait(30)
        except subprocess.TimeoutExpired:
            os.killpg(gunicorn.pid, signal.SIGKILL)
        log.close()


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--tree", action="append", default=[], help="label=path of a checkout (repeatable)")
    ap.add_argument("--db-url", default="postgres://postgres@127.0.0.1:5432/reg_infra_load")
    ap.add_argument("--clients", type=int, default=50)
    ap.add_argument("--seconds", type=float, default=20.0)
    ap.add_argument("--rate", type=float, default=50.0)
    ap.add_argument("--open-seconds", type=float, default=20.0)
    ap.add_argument("--workers", type=int, default=2)
    args = ap.parse_args()
    trees = [t.split("=", 1) for t in args.tree] or [["this", str(ROOT)]]
    results = {label: run_tree(label, Path(path).resolve(), args) for label, path in trees}
    print()
    print(
        f"gunicorn {args.workers} workers + nginx, production mode, loopback; closed loop {args.clients} clients "
        f"x {args.seconds:.0f} s; open loop {args.rate:.0f} req/s x {args.open_seconds:.0f} s"
    )
    print(f"{'tree':<10}{'endpoint':<14}{'req/s':>9}{'p50 ms':>9}{'p95 ms':>9}{'p99 ms':>9}  statuses")
    for label, r in results.items():
        for name, e in r["endpoints"].items():
            print(
                f"{label:<10}{name:<14}{e['rps']:>9.1f}{e['p50_ms']:>9.1f}{e['p95_ms']:>9.1f}{e['p99_ms']:>9.1f}"
                f"  {e['statuses']} errors {e['errors']}"
            )
        o = r["open_loop"]
        print(
            f"{label:<10}{'open loop':<14}{o['rps']:>9.1f}{o['p50_ms']:>9.1f}{o['p95_ms']:>9.1f}{o['p99_ms']:>9.1f}"
            f"  {o['statuses']} errors {o['errors']}"
        )
    if len(results) == 2:
        (a, ra), (b, rb) = results.items()
        for name in ra["endpoints"]:
            ratio = rb["endpoints"][name]["rps"] / max(ra["endpoints"][name]["rps"], 1e-9)
            print(f"{name}: {b} / {a} throughput {ratio:.2f}x")
    loads = ", ".join(f"{k} {r['load_average_1min']:.1f}" for k, r in results.items())
    print(f"1-minute load average at the end of each tree's run ({os.cpu_count()} CPUs): {loads}")
    print()
    print(json.dumps(results, indent=2))


if __name__ == "__main__":
    main()
