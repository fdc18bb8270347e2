"""Prepared statements for the reads of every signed-in request (registry/dbprepared.py)."""

from __future__ import annotations

import pytest
from django.db import connection, transaction
from django.test.utils import CaptureQueriesContext

from registry import dbprepared

SQL = "SELECT CAST(%s AS integer) + 1, CAST(%s AS text)"


def test_placeholders_are_numbered_and_a_stray_percent_is_refused():
    assert dbprepared._numbered("SELECT a FROM t WHERE b = %s AND c > %s") == "SELECT a FROM t WHERE b = $1 AND c > $2"
    with pytest.raises(ValueError):
        dbprepared._numbered("SELECT a FROM t WHERE b LIKE 'x%' AND c = %s")


@pytest.mark.django_db(transaction=True)
def test_the_same_rows_on_every_database_across_rollbacks_and_new_connections():
    assert dbprepared.fetchone(connection, "registry_test_add", SQL, [41, "a"]) == (42, "a")
    try:
        with transaction.atomic():
            assert dbprepared.fetchone(connection, "registry_test_add", SQL, [1, "b"]) == (2, "b")
            raise RuntimeError("roll back")
    except RuntimeError:
        pass
    assert dbprepared.fetchone(connection, "registry_test_add", SQL, [2, "c"]) == (3, "c")
    connection.close()  # the next connection has no prepared statements: prepared again
    assert dbprepared.fetchone(connection, "registry_test_add", SQL, [3, "d"]) == (4, "d")


@pytest.mark.django_db
def test_on_postgresql_the_query_runs_by_name_and_the_setting_turns_that_off(settings):
    if connection.vendor != "postgresql":
        pytest.skip("needs PostgreSQL: run with DATABASE_URL=postgres://...")
    with CaptureQueriesContext(connection) as ctx:
        assert dbprepared.fetchone(connection, "registry_test_named", SQL, [1, "x"]) == (2, "x")
    assert [q["sql"].split("(")[0].strip() for q in ctx.captured_queries] == ["EXECUTE registry_test_named"]
    settings.REGISTRY = settings.REGISTRY | {"DB_PREPARED_STATEMENTS": False}
    with CaptureQueriesContext(connection) as ctx:
        assert dbprepared.fetchone(connection, "registry_test_named", SQL, [1, "x"]) == (2, "x")
    assert ctx.captured_queries[0]["sql"].startswith("SELECT CAST(1 AS integer) + 1")
