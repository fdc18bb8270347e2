"""Local fixtures: a fast password hasher (users are created per test; PBKDF2 would dominate the run), and an
empty database of the suite's own kind for migration tests."""

import uuid

import pytest
from django.conf import settings
from django.db import connection


@pytest.fixture(autouse=True)
def _fast_password_hasher(settings):
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]


@pytest.fixture
def fresh_database_url(tmp_path):
    """A URL of an empty database of the suite's own kind (dropped afterwards on PostgreSQL)."""
    if connection.vendor == "sqlite":
        yield f"sqlite:///{tmp_path / 'migration.sqlite3'}"
        return
    import psycopg

    params = settings.DATABASES["default"]
    name = f"{params['NAME']}_m{uuid.uuid4().hex[:8]}"
    dsn = {
        "host": params.get("HOST") or "127.0.0.1",
        "port": params.get("PORT") or 5432,
        "user": params.get("USER") or "postgres",
        "password": params.get("PASSWORD") or None,
        "dbname": "postgres",
    }
    with psycopg.connect(**dsn, autocommit=True) as admin:
        admin.execute(f'CREATE DATABASE "{name}"')
    user = dsn["user"] + (f":{dsn['password']}" if dsn["password"] else "")
    try:
        yield f"postgres://{user}@{dsn['host']}:{dsn['port']}/{name}"
    finally:
        with psycopg.connect(**dsn, autocommit=True) as admin:
            admin.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
