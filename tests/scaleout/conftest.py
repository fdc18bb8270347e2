"""A whole office of several machines on loopback, for the scale-out tests (issue 11).

One session fixture, :func:`office`, builds what deploy/README.md "Running it for many offices" describes:

* a PostgreSQL primary (its own cluster: initdb in a temporary folder, its own port and socket) with the
  registry migrated and the invented demo district loaded, plus one signed sheet;
* a streaming replica of it made with ``pg_basebackup -R`` (another port);
* an S3-compatible object store (moto's server mode) for uploads and signed documents;
* two gunicorn application servers (deploy/gunicorn.conf.py) on two loopback ports, both using all three;
* nginx with the shipped site file (deploy/nginx/registry.conf) and both servers in its upstream;
* two background workers (``manage.py task_worker``).

The test suite's own database is not involved. These tests run in the PostgreSQL half only (they skip, with
the reason, when DATABASE_URL is not PostgreSQL, or when the server binaries, gunicorn, moto or nginx are
missing); everything they start is stopped and removed at the end.
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.parse
from dataclasses import dataclass, field
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
PY = sys.executable


def _pg_bin() -> Path | None:
    env = os.environ.get("REGISTRY_PGBIN")
    if env and Path(env, "initdb").exists():
        return Path(env)
    for d in sorted(Path("/usr/lib/postgresql").glob("*/bin"), key=lambda p: int(p.parent.name), reverse=True):
        if (d / "initdb").exists() and (d / "pg_basebackup").exists():
            return d
    return None


def _skip_reason() -> str | None:
    url = os.environ.get("DATABASE_URL", "")
    if not url.startswith(("postgres", "postgis", "pgsql")):
        return "scale-out tests run with PostgreSQL only (DATABASE_URL is not PostgreSQL)"
    if _pg_bin() is None:
        return "PostgreSQL server binaries not found (/usr/lib/postgresql/<version>/bin)"
    if shutil.which("gunicorn", path=str(Path(PY).parent)) is None:
        return "gunicorn is not installed in this environment"
    try:
        import moto.server  # noqa: F401
    except ImportError:
        return "moto[server] is not installed (requirements-dev.txt)"
    return None


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def wait_port(port: int, timeout_s: float = 60.0, proc: subprocess.Popen | None = None) -> None:
    end = time.monotonic() + timeout_s
    while time.monotonic() < end:
        if proc is not None and proc.poll() is not None:
            raise RuntimeError(f"process exited with {proc.returncode} before listening on {port}")
        try:
            socket.create_connection(("127.0.0.1", port), 0.5).close()
            return
        except OSError:
            time.sleep(0.1)
    raise TimeoutError(f"nothing listens on 127.0.0.1:{port} after {timeout_s} s")


@dataclass
class Cluster:
    name: str
    data: Path
    port: int
    sock: Path
    pgbin: Path
    as_pg: list[str]
    log: Path

    def url(self, db: str = "registry") -> str:
        return f"postgres://postgres@{urllib.parse.quote(str(self.sock), safe='')}:{self.port}/{db}"

    def psql(self, sql: str, db: str = "registry") -> str:
        out = subprocess.run(
            [str(self.pgbin / "psql"), "-X", "-q", "-At", "-v", "ON_ERROR_STOP=1", "-h", str(self.sock)]
            + ["-p", str(self.port), "-U", "postgres", "-d", db, "-c", sql],
            capture_output=True,
            text=True,
            check=True,
        )
        return out.stdout.strip()

    def start(self) -> None:
        subprocess.run(
            [
                *self.as_pg,
                str(self.pgbin / "pg_ctl"),
                "-D",
                str(self.data),
                "-l",
                str(self.log),
                "-w",
                "-t",
                "60",
                "start",
            ],
            check=True,
            capture_output=True,
            cwd="/",
        )

    def stop(self, mode: str = "fast") -> None:
        subprocess.run(
            [*self.as_pg, str(self.pgbin / "pg_ctl"), "-D", str(self.data), "-m", mode, "-w", "stop"],
            capture_output=True,
            cwd="/",
        )


@dataclass
class Office:
    tmp: Path
    primary: Cluster
    replica: Cluster
    env: dict
    s3_port: int
    bucket: str
    app_ports: list[int]
    https_port: int
    tokens: dict
    procs: dict = field(default_factory=dict)
    logs: Path | None = None

    # --- processes ---------------------------------------------------------------------------
    def spawn(self, name: str, argv: list[str], extra_env: dict | None = None) -> subprocess.Popen:
        log = open(self.logs / f"{name}.log", "ab")  # noqa: SIM115 - closed with the process
        proc = subprocess.Popen(
            argv,
            cwd=ROOT,
            env={**self.env, **(extra_env or {})},
            stdout=log,
            stderr=subprocess.STDOUT,
            stdin=subprocess.DEVNULL,
            start_new_session=True,
        )
        self.procs[name] = proc
        return proc

    def start_app(self, index: int) -> subprocess.Popen:
        port = self.app_ports[index]
        proc = self.spawn(
            f"app{index}",
            [str(Path(PY).parent / "gunicorn"), "--config", str(ROOT / "deploy" / "gunicorn.conf.py")],
            {"REGISTRY_GUNICORN_BIND": f"127.0.0.1:{port}", "REGISTRY_GUNICORN_WORKERS": "2"},
        )
        wait_port(port, 60, proc)
        # Listening is not serving: wait until a worker answers a page (as an administrator checks).
        import urllib.request

        opener = urllib.request.build_opener(urllib.request.ProxyHandler({}))  # loopback: no proxy
        end = time.monotonic() + 120
        while True:
            try:
                with opener.open(f"http://127.0.0.1:{port}/signin/", timeout=10) as r:
                    if r.status == 200:
                        break
            except OSError:
                pass
            if time.monotonic() > end or proc.poll() is not None:
                raise RuntimeError(f"application server {index} does not answer: " + self.log_text(f"app{index}"))
            time.sleep(0.2)
        return proc

    def stop(self, name: str, sig: int = signal.SIGTERM, timeout_s: float = 30) -> None:
        proc = self.procs.get(name)
        if proc is None or proc.poll() is not None:
            return
        os.killpg(proc.pid, sig)
        try:
            proc.wait(timeout_s)
        except subprocess.TimeoutExpired:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait(10)

    def manage(self, *args: str, check: bool = True, extra_env: dict | None = None) -> subprocess.CompletedProcess:
        return subprocess.run(
            [PY, "manage.py", *args],
            cwd=ROOT,
            env={**self.env, **(extra_env or {})},
            capture_output=True,
            text=True,
            check=check,
            timeout=300,
        )

    def app_url(self, index: int) -> str:
        return f"http://127.0.0.1:{self.app_ports[index]}"

    def log_text(self, name: str) -> str:
        p = self.logs / f"{name}.log"
        return p.read_text(errors="replace")[-4000:] if p.exists() else ""


def _make_primary(tmp: Path, pgbin: Path, as_pg: list[str], sock: Path) -> Cluster:
    data = tmp / "primary"
    data.mkdir(mode=0o700)
    if as_pg:
        shutil.chown(data, "postgres")
    subprocess.run(
        [
            *as_pg,
            str(pgbin / "initdb"),
            "-D",
            str(data),
            "-U",
            "postgres",
            "--auth=trust",
            "-E",
            "UTF8",
            "--locale=C.UTF-8",
        ],
        check=True,
        capture_output=True,
        cwd="/",
    )
    port = free_port()
    with open(data / "postgresql.conf", "a") as fh:
        fh.write(
            f"""
port = {port}
listen_addresses = ''
unix_socket_directories = '{sock}'
wal_level = replica
max_wal_senders = 5
hot_standby = on
shared_buffers = 48MB
max_connections = 60
fsync = off
"""
        )
    cluster = Cluster("primary", data, port, sock, pgbin, as_pg, tmp / "logs" / "primary.log")
    cluster.start()
    return cluster


def _make_replica(tmp: Path, primary: Cluster) -> Cluster:
    data = tmp / "replica"
    data.mkdir(mode=0o700)
    if primary.as_pg:
        shutil.chown(data, "postgres")
    subprocess.run(
        [*primary.as_pg, str(primary.pgbin / "pg_basebackup"), "-h", str(primary.sock), "-p", str(primary.port)]
        + ["-U", "postgres", "-D", str(data), "-R", "-X", "stream", "-c", "fast"],
        check=True,
        capture_output=True,
        cwd="/",
    )
    port = free_port()
    subprocess.run(
        [*primary.as_pg, "sh", "-c", f"printf '\\nport = {port}\\n' >> '{data}/postgresql.conf'"],
        check=True,
        cwd="/",
    )
    replica = Cluster("replica", data, port, primary.sock, primary.pgbin, primary.as_pg, tmp / "logs" / "replica.log")
    replica.start()
    return replica


@pytest.fixture(scope="session")
def office():
    reason = _skip_reason()
    if reason:
        pytest.skip(reason)
    pgbin = _pg_bin()
    as_pg = ["runuser", "-u", "postgres", "--"] if os.geteuid() == 0 else []
    tmp = Path(tempfile.mkdtemp(prefix="registry-office-"))
    tmp.chmod(0o755)
    logs = tmp / "logs"
    sock = tmp / "sock"
    for d in (logs, sock):
        d.mkdir(mode=0o777)
        if as_pg:
            shutil.chown(d, "postgres")
    timings = {}
    t0 = time.monotonic()
    primary = replica = None
    office = None
    try:
        primary = _make_primary(tmp, pgbin, as_pg, sock)
        primary.psql("CREATE DATABASE registry", db="postgres")
        primary.psql("CREATE EXTENSION postgis")
        s3_port = free_port()
        env = {
            k: v
            for k, v in os.environ.items()
            if not k.startswith(("REGISTRY_", "DJANGO_", "PYTEST_", "AWS_")) and k != "DATABASE_URL"
        }
        env.update(
            {
                "DATABASE_URL": primary.url(),
                "REGISTRY_DATA_DIR": str(tmp / "var"),
                "REGISTRY_DEBUG": "0",
                "REGISTRY_SECRET_KEY": "scale-out-test-only-secret-key-0123456789-abcdefghijklmnop",
                "REGISTRY_ALLOWED_HOSTS": "127.0.0.1,localhost,registry.example.org",
                "REGISTRY_TASK_BACKEND": "database",
                "REGISTRY_STORAGE": "s3",
                "REGISTRY_S3_BUCKET": "registry-office",
                "REGISTRY_S3_ENDPOINT_URL": f"http://127.0.0.1:{s3_port}",
                "REGISTRY_S3_REGION": "us-east-1",
                "REGISTRY_S3_ACCESS_KEY_ID": "test-only-key",
                "REGISTRY_S3_SECRET_ACCESS_KEY": "test-only-secret",
                # The client's address from X-Real-IP, as behind the production nginx: tests that need a
                # client of their own (the shared rate limit) say so, and leave 127.0.0.1's budget alone.
                "REGISTRY_CLIENT_IP_HEADER": "HTTP_X_REAL_IP",
                "REGISTRY_REPLICA_PIN_SECONDS": "3",
                "REGISTRY_REPLICA_MAX_LAG_SECONDS": "600",
                "REGISTRY_REPLICA_RETRY_SECONDS": "2",
                "REGISTRY_TASK_RECOVER_SECONDS": "2",
                "REGISTRY_GUNICORN_LOG_LEVEL": "warning",
                "REGISTRY_LOG_LEVEL": "WARNING",
                "AWS_EC2_METADATA_DISABLED": "true",
                "PYTHONUNBUFFERED": "1",
            }
        )
        office = Office(
            tmp, primary, None, env, s3_port, "registry-office", [free_port(), free_port()], 0, {}, logs=logs
        )
        office.spawn("s3", [PY, "-m", "moto.server", "-H", "127.0.0.1", "-p", str(s3_port)])
        wait_port(s3_port, 60, office.procs["s3"])
        import boto3

        boto3.client(
            "s3",
            endpoint_url=f"http://127.0.0.1:{s3_port}",
            region_name="us-east-1",
            aws_access_key_id="test-only-key",
            aws_secret_access_key="test-only-secret",
        ).create_bucket(Bucket="registry-office")
        timings["clusters and store"] = time.monotonic() - t0

        t = time.monotonic()
        office.manage("migrate", "--noinput", "-v", "0")
        # The invented demo district and one signed sheet (its PDF goes to the object store).
        subprocess.run(
            [PY, str(ROOT / "deploy" / "drill_data.py"), "before"], cwd=ROOT, env=env, check=True, capture_output=True
        )
        out = office.manage(
            "shell",
            "-c",
            "import json; from django.contrib.auth import get_user_model; from rest_framework.authtoken.models "
            "import Token; U = get_user_model(); print(json.dumps({n: Token.objects.get_or_create(user=U.objects."
            "get(username='demo_' + n))[0].key for n in ('manager', 'technician', 'viewer')}))",
        ).stdout
        office.tokens = json.loads(out.strip().splitlines()[-1])
        timings["migrate and demo data"] = time.monotonic() - t

        t = time.monotonic()
        replica = _make_replica(tmp, primary)
        office.replica = replica
        office.env["REGISTRY_REPLICA_URL"] = replica.url()
        timings["replica"] = time.monotonic() - t

        t = time.monotonic()
        office.start_app(0)
        office.start_app(1)
        for i in (0, 1):
            office.spawn(f"worker{i}", [PY, "manage.py", "task_worker", "--interval", "0.5", "--no-startup-delay"])
        timings["app servers and workers"] = time.monotonic() - t
        timings["total"] = time.monotonic() - t0
        office.timings = timings
        print("\noffice built: " + ", ".join(f"{k} {v:.1f} s" for k, v in timings.items()))
        yield office
    finally:
        if office is not None:
            for name in list(office.procs):
                office.stop(name, signal.SIGKILL if name.startswith("worker") else signal.SIGTERM, 15)
        for c in (replica, primary):
            if c is not None:
                c.stop("immediate")
        if os.environ.get("REGISTRY_KEEP_OFFICE"):
            print(f"office kept in {tmp}")
        else:
            shutil.rmtree(tmp, ignore_errors=True)


def api(office: Office, who: str, index: int = 0):
    """A requests session for one demo user against one application server (cookies kept)."""
    import requests

    s = requests.Session()
    s.trust_env = False  # loopback only: no proxy from the environment
    s.headers["Authorization"] = f"Token {office.tokens[who]}"
    s.base = office.app_url(index)
    return s


#: The demo users' DEMO-only passwords (fixtures_demo/district.py).
DEMO_PASSWORDS = {
    "viewer": "demo-only-viewer-Q7",
    "technician": "demo-only-technician-K4",
    "manager": "demo-only-manager-W2",
}


def signed_in(office: Office, who: str, index: int = 0, base: str | None = None):
    """A requests session signed in through the sign-in page (pages and /media/ use the session)."""
    import re

    import requests

    s = requests.Session()
    s.trust_env = False  # loopback only: no proxy from the environment
    s.base = base or office.app_url(index)
    page = s.get(s.base + "/signin/", timeout=30)
    token = re.search(r'name="csrfmiddlewaretoken" value="([^"]+)"', page.text).group(1)
    r = s.post(
        s.base + "/signin/",
        data={"username": f"demo_{who}", "password": DEMO_PASSWORDS[who], "csrfmiddlewaretoken": token},
        headers={"Referer": s.base + "/signin/"},
        timeout=30,
        allow_redirects=False,
    )
    assert r.status_code == 302, r.text[:500]
    return s
