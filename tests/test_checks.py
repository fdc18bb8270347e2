"""The PostGIS system check (registry.E001 / registry.W001).

It is a deployment check on the ``database`` tag, so it runs with
``manage.py check --deploy --database default``. These tests go through Django's
check registry (``run_checks``), against real databases: the test database, a
database created without PostGIS (PostgreSQL runs only) and a port where nothing listens.
"""

from __future__ import annotations

import socket

import pytest
from django.core.checks import Tags, run_checks
from django.db import connection, connections


def _registry_messages(databases: list[str]) -> list:
    messages = run_checks(tags=[Tags.database], include_deployment_checks=True, databases=databases)
    return [m for m in messages if m.id and m.id.startswith("registry.")]


def _closed_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]  # released on close: nothing listens there afterwards


@pytest.fixture
def extra_alias(django_db_blocker):
    """Register a temporary connection alias; closed and removed afterwards.

    The tests using it run outside a Django test case (no ``django_db`` mark): Django's
    test cases refuse aliases they were not told about, with a message that would mask
    the real connection error.
    """
    added: list[str] = []

    def add(alias: str, **overrides) -> str:
        cfg = dict(connection.settings_dict)
        cfg.update(overrides)
        connections.settings[alias] = cfg
        added.append(alias)
        return alias

    with django_db_blocker.unblock():
        yield add
        for alias in added:
            try:
                connections[alias].close()
                del connections[alias]
            except AttributeError:  # never opened in this thread
                pass
            del connections.settings[alias]


def test_the_check_is_registered_for_deployment_only():
    from django.core.checks.registry import registry

    from registry.checks import check_postgis

    assert check_postgis in registry.get_checks(include_deployment_checks=True)
    assert check_postgis not in registry.get_checks(include_deployment_checks=False)


def test_no_database_given_means_no_query():
    from registry.checks import check_postgis

    assert check_postgis(databases=None) == []


@pytest.mark.django_db
def test_test_database_passes():
    # SQLite: the check does not apply; PostgreSQL: test databases get PostGIS from template1.
    assert _registry_messages(["default"]) == []
    if connection.vendor == "postgresql":
        with connection.cursor() as cur:
            cur.execute("SELECT extversion FROM pg_extension WHERE extname = 'postgis'")
            assert cur.fetchone() is not None


def test_unreachable_postgresql_gives_a_warning_not_a_crash(extra_alias):
    alias = extra_alias(
        "unreachable",
        ENGINE="django.db.backends.postgresql",
        NAME="nowhere",
        HOST="127.0.0.1",
        PORT=str(_closed_port()),
        USER="nobody",
        PASSWORD="",
        OPTIONS={"connect_timeout": 2},
    )
    messages = _registry_messages([alias])
    assert [m.id for m in messages] == ["registry.W001"], [m.msg for m in messages]
    assert "Could not query PostGIS on 'unreachable'" in messages[0].msg
    assert "connection" in messages[0].msg.lower()  # libpq's own words, e.g. "Connection refused"
    assert "not allowed" not in messages[0].msg


def test_postgresql_database_without_postgis_is_an_error(extra_alias):
    if connection.vendor != "postgresql":
        pytest.skip("needs PostgreSQL: run with DATABASE_URL=postgres://... (deploy/test.sh does)")
    import psycopg

    cfg = connection.settings_dict
    name = f"{cfg['NAME']}_nopostgis"[:63]  # derived from DATABASE_URL's name: no clash with colleagues
    params = {
        "host": cfg.get("HOST") or None,
        "port": cfg.get("PORT") or None,
        "user": cfg.get("USER") or None,
        "password": cfg.get("PASSWORD") or None,
        "dbname": "postgres",
        "autocommit": True,
    }
    with psycopg.connect(**{k: v for k, v in params.items() if v is not None}) as admin:
        admin.execute(f'DROP DATABASE IF EXISTS "{name}"')
        admin.execute(f'CREATE DATABASE "{name}" TEMPLATE template0')  # template0 never has PostGIS
        try:
            alias = extra_alias("nopostgis", NAME=name)
            messages = _registry_messages([alias])
            assert [m.id for m in messages] == ["registry.E001"], [m.msg for m in messages]
            assert "CREATE EXTENSION postgis" in messages[0].hint
            connections[alias].close()
        finally:
            admin.execute(f'DROP DATABASE IF EXISTS "{name}"')
