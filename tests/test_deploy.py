"""Deployment files: scripts parse, env.example is complete, gunicorn and systemd files load,
the backup script writes restorable backups and applies its retention rule, and the
PostgreSQL preflight used by deploy/test.sh tells its cases apart.
"""

from __future__ import annotations

import os
import re
import shutil
import sqlite3
import subprocess
import sys
import tarfile
import time
from pathlib import Path

import pytest

BASE_DIR = Path(__file__).resolve().parent.parent
DEPLOY = BASE_DIR / "deploy"
SCRIPTS = [DEPLOY / "demo.sh", DEPLOY / "test.sh", DEPLOY / "backup.sh", DEPLOY / "common.sh", BASE_DIR / ".ci" / "run"]
STAMP_RE = re.compile(r"^\d{8}T\d{6}Z$")


def clean_env(**extra: str) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("REGISTRY_", "DJANGO_", "DATABASE_URL"))}
    env.update(extra)
    return env


# --- scripts and configuration files ---------------------------------------------------------


@pytest.mark.parametrize("script", SCRIPTS, ids=lambda p: str(p.relative_to(BASE_DIR)))
def test_shell_scripts_parse(script):
    proc = subprocess.run(["bash", "-n", str(script)], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr


def _variables_read_by_the_code() -> set[str]:
    """REGISTRY_* names read from the environment in registry/ and deploy/ (Python and shell)."""
    py_read = re.compile(
        r"""(?:environ\.get\(|environ\[|getenv\(|env_bool\(|env_list\(|env_secret\()\s*["'](REGISTRY_[A-Z0-9_]+)["']"""
    )
    sh_read = re.compile(r"\$\{?(REGISTRY_[A-Z0-9_]+)")
    names: set[str] = set()
    for path in [*(BASE_DIR / "registry").rglob("*.py"), *DEPLOY.rglob("*.py")]:
        if "migrations" not in path.parts:
            names |= set(py_read.findall(path.read_text(encoding="utf-8")))
    for path in DEPLOY.rglob("*.sh"):
        names |= set(sh_read.findall(path.read_text(encoding="utf-8")))
    return names


def test_env_example_lists_every_variable_the_code_reads():
    text = (DEPLOY / "env.example").read_text(encoding="utf-8")
    listed = set(re.findall(r"^#?(REGISTRY_[A-Z0-9_]+)=", text, flags=re.MULTILINE))
    read = _variables_read_by_the_code()
    assert {"REGISTRY_SECRET_KEY", "REGISTRY_PRODUCTION", "REGISTRY_DATA_DIR"} <= read  # the scan works
    assert read - listed == set(), "add these to deploy/env.example"
    assert listed - read == set(), "deploy/env.example lists variables nothing reads"
    assert re.search(r"^DATABASE_URL=", text, flags=re.MULTILINE)


def test_gunicorn_config_loads_the_app_in_production_mode():
    env = clean_env(
        REGISTRY_PRODUCTION="1",
        REGISTRY_SECRET_KEY="t3st-0nly-s3cret-kq9Vx2mZ7pL4wR8nB6yH1cJ5dF0gT-aE!uQ",
        REGISTRY_ALLOWED_HOSTS="registry.example.org",
    )
    gunicorn = Path(sys.executable).with_name("gunicorn")
    cfg = ["--config", str(DEPLOY / "gunicorn.conf.py")]
    proc = subprocess.run(
        [str(gunicorn), *cfg, "--check-config"], cwd=BASE_DIR, env=env, capture_output=True, text=True
    )
    assert proc.returncode == 0, proc.stderr
    shown = subprocess.run(
        [str(gunicorn), *cfg, "--print-config"], cwd=BASE_DIR, env=env, capture_output=True, text=True
    )
    values = dict(re.findall(r"^(\w+)\s+= (.*)$", shown.stdout, flags=re.MULTILINE))
    assert values["wsgi_app"] == "registry.wsgi:application"
    assert values["bind"] == "['127.0.0.1:8001']"
    # nginx must wait longer than gunicorn, so that a slow request ends in gunicorn's log.
    nginx = (DEPLOY / "nginx" / "registry.conf").read_text(encoding="utf-8")
    assert int(re.search(r"proxy_read_timeout (\d+)s;", nginx).group(1)) > int(values["timeout"])
    assert "server 127.0.0.1:8001 " in nginx


def test_gunicorn_refuses_production_without_a_secret():
    gunicorn = Path(sys.executable).with_name("gunicorn")
    proc = subprocess.run(
        [str(gunicorn), "--config", str(DEPLOY / "gunicorn.conf.py"), "--check-config"],
        cwd=BASE_DIR,
        env=clean_env(REGISTRY_PRODUCTION="1", REGISTRY_ALLOWED_HOSTS="registry.example.org"),
        capture_output=True,
        text=True,
    )
    assert proc.returncode != 0
    assert "REGISTRY_SECRET_KEY is not set" in proc.stderr


@pytest.mark.skipif(shutil.which("systemd-analyze") is None, reason="systemd-analyze not installed")
def test_systemd_units_verify(tmp_path):
    # Point the units at this checkout so that systemd can see the programs they start.
    for unit in (DEPLOY / "systemd").iterdir():
        text = unit.read_text(encoding="utf-8").replace("/srv/registry/app", str(BASE_DIR))
        (tmp_path / unit.name).write_text(text, encoding="utf-8")
    units = sorted(str(p) for p in tmp_path.iterdir())
    assert len(units) == 4  # registry, registry-worker, registry-backup (.service, .timer)
    proc = subprocess.run(["systemd-analyze", "verify", *units], cwd=tmp_path, capture_output=True, text=True)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert proc.stderr.strip() == "", proc.stderr


# --- backup.sh -------------------------------------------------------------------------------


def run_backup(tmp_path: Path, **extra: str) -> subprocess.CompletedProcess:
    env = clean_env(
        REGISTRY_DATA_DIR=str(tmp_path / "data"),
        REGISTRY_BACKUP_DIR=str(tmp_path / "backups"),
        **extra,
    )
    return subprocess.run(["bash", str(DEPLOY / "backup.sh")], env=env, capture_output=True, text=True, timeout=300)


def make_data_dir(tmp_path: Path) -> None:
    data = tmp_path / "data"
    (data / "media" / "marks" / "DEMO-1").mkdir(parents=True)
    (data / "media" / "marks" / "DEMO-1" / "photo.jpg").write_bytes(b"\xff\xd8 invented photo bytes")
    with sqlite3.connect(data / "registry.sqlite3") as db:
        db.execute("CREATE TABLE t (code TEXT)")
        db.execute("INSERT INTO t VALUES ('DEMO-1')")


def backups(tmp_path: Path) -> list[Path]:
    return sorted(p for p in (tmp_path / "backups").iterdir() if STAMP_RE.match(p.name))


def check_archive_and_sums(folder: Path) -> None:
    with tarfile.open(folder / "media.tar.gz") as tar:
        assert "media/marks/DEMO-1/photo.jpg" in tar.getnames()
    proc = subprocess.run(["sha256sum", "--check", "--quiet", "SHA256SUMS"], cwd=folder, capture_output=True, text=True)
    assert proc.returncode == 0, proc.stdout + proc.stderr


def test_backup_of_the_sqlite_default_is_restorable(tmp_path):
    make_data_dir(tmp_path)
    proc = run_backup(tmp_path)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    [folder] = backups(tmp_path)
    with sqlite3.connect(folder / "registry.sqlite3") as db:
        assert db.execute("SELECT code FROM t").fetchall() == [("DEMO-1",)]
    check_archive_and_sums(folder)
    assert not list((tmp_path / "backups").glob(".partial-*"))


def test_backup_retention_keeps_the_newest_and_removes_only_old_stamped_folders(tmp_path):
    make_data_dir(tmp_path)
    root = tmp_path / "backups"
    month_ago = time.time() - 30 * 86400
    for name in ["20200101T000000Z", "20200102T000000Z", "20200103T000000Z", "notes"]:
        (root / name).mkdir(parents=True)
        os.utime(root / name, (month_ago, month_ago))
    proc = run_backup(tmp_path, REGISTRY_BACKUP_KEEP_DAYS="14", REGISTRY_BACKUP_KEEP_MIN="2")
    assert proc.returncode == 0, proc.stdout + proc.stderr
    left = sorted(p.name for p in root.iterdir() if not p.name.startswith("."))
    # Newest two kept (today's and 20200103), older stamped folders removed, other folders untouched.
    assert len(left) == 3 and "notes" in left and "20200103T000000Z" in left
    assert "20200101T000000Z" not in left and "20200102T000000Z" not in left


def test_backup_fails_clearly_and_leaves_nothing_when_there_is_no_database(tmp_path):
    (tmp_path / "data").mkdir()
    proc = run_backup(tmp_path)
    assert proc.returncode != 0
    assert "no SQLite file" in proc.stderr
    assert list((tmp_path / "backups").iterdir()) == [(tmp_path / "backups" / ".lock")]


def _database_url(settings_dict: dict) -> str:
    user = settings_dict.get("USER") or ""
    password = settings_dict.get("PASSWORD") or ""
    auth = f"{user}:{password}@" if password else (f"{user}@" if user else "")
    host = settings_dict.get("HOST") or "127.0.0.1"
    port = settings_dict.get("PORT") or "5432"
    return f"postgresql://{auth}{host}:{port}/{settings_dict['NAME']}"


@pytest.mark.django_db
def test_backup_of_postgresql_is_a_custom_format_dump(tmp_path):
    from django.db import connection

    if connection.vendor != "postgresql":
        pytest.skip("needs PostgreSQL: run with DATABASE_URL=postgres://... (deploy/test.sh does)")
    if shutil.which("pg_dump") is None:
        pytest.skip("pg_dump not installed (postgresql-client)")
    make_data_dir(tmp_path)
    proc = run_backup(tmp_path, DATABASE_URL=_database_url(connection.settings_dict))
    assert proc.returncode == 0, proc.stdout + proc.stderr
    [folder] = backups(tmp_path)
    listing = subprocess.run(["pg_restore", "--list", str(folder / "database.dump")], capture_output=True, text=True)
    assert listing.returncode == 0
    assert "TABLE public registry_mark" in listing.stdout
    check_archive_and_sums(folder)


# --- deploy/pg_preflight.py ------------------------------------------------------------------


def preflight(url: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, str(DEPLOY / "pg_preflight.py"), url], capture_output=True, text=True, timeout=60
    )


def test_preflight_reports_an_unreachable_server():
    import socket

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    proc = preflight(f"postgres://nobody@127.0.0.1:{port}/nothing")
    assert proc.returncode == 3, proc.stdout + proc.stderr
    assert "no PostgreSQL server answers" in proc.stdout


@pytest.mark.django_db
def test_preflight_accepts_the_database_the_tests_run_on():
    from django.db import connection

    if connection.vendor != "postgresql":
        pytest.skip("needs PostgreSQL: run with DATABASE_URL=postgres://... (deploy/test.sh does)")
    proc = preflight(_database_url(connection.settings_dict))
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert "PostGIS" in proc.stdout and "in template1" in proc.stdout
