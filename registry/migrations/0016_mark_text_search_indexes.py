"""Trigram indexes for the mark search (code/name starts with or contains, free text), PostgreSQL only.

Django's case-insensitive lookups on PostgreSQL compare ``UPPER(column::text)``; these GIN indexes
(``pg_trgm``'s ``gin_trgm_ops``) on exactly those expressions serve ``LIKE '%…%'`` and ``LIKE '…%'``
on code, name, marking and keeper, so that a search among a million marks reads the index instead
of every row. Built ``CONCURRENTLY`` (the migration is not atomic), so an existing registry keeps
taking writes while they are built. On SQLite the migration does nothing: a small registry is
searched by scanning, which stays fast at its size.
"""

from django.db import migrations

COLUMNS = ("code", "name", "marking", "keeper")


def _forward(apps, schema_editor):
    if schema_editor.connection.vendor != "postgresql":
        return
    schema_editor.execute("CREATE EXTENSION IF NOT EXISTS pg_trgm")
    for column in COLUMNS:
        schema_editor.execute(
            f"CREATE INDEX CONCURRENTLY IF NOT EXISTS mark_{column}_upper_trgm "
            f"ON registry_mark USING gin ((UPPER({column}::text)) gin_trgm_ops)"
        )


def _backward(apps, schema_editor):
    if schema_editor.connection.vendor != "postgresql":
        return
    for column in COLUMNS:
        schema_editor.execute(f"DROP INDEX CONCURRENTLY IF EXISTS mark_{column}_upper_trgm")


class Migration(migrations.Migration):
    atomic = False

    dependencies = [("registry", "0011_signed_document_triggers")]

    operations = [migrations.RunPython(_forward, _backward, elidable=False)]
