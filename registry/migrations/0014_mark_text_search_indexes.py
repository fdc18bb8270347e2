"""Trigram indexes for the mark search (code/name starts with or contains, free text), PostgreSQL only.

Django's case-insensitive lookups on PostgreSQL compare ``UPPER(column::text)``; these GIN indexes
(``pg_trgm``'s ``gin_trgm_ops``) on exactly those expressions serve ``LIKE '%…%'`` and ``LIKE '…%'``
on code, name, marking and keeper, so that a search among a million marks reads the index instead
of every row. Codes are capital letters, digits and ``_.-`` (``CODE_VALIDATOR``), so "code starts
with" is a case-sensitive ``LIKE 'Q%'`` on the upper-cased query, served by a ``varchar_pattern_ops``
B-tree (a range scan; the trigram index would read the posting lists of trigrams every code shares).
``ANALYZE`` afterwards gives the planner statistics on the indexed expressions: without them it
guessed thousands of matches for a word that matches none and walked the whole code index (5 s). Built ``CONCURRENTLY`` (the migration is not atomic), so an existing registry keeps
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
    schema_editor.execute(
        "CREATE INDEX CONCURRENTLY IF NOT EXISTS mark_code_prefix ON registry_mark (code varchar_pattern_ops)"
    )
    schema_editor.execute("ANALYZE registry_mark")


def _backward(apps, schema_editor):
    if schema_editor.connection.vendor != "postgresql":
        return
    schema_editor.execute("DROP INDEX CONCURRENTLY IF EXISTS mark_code_prefix")
    for column in COLUMNS:
        schema_editor.execute(f"DROP INDEX CONCURRENTLY IF EXISTS mark_{column}_upper_trgm")


class Migration(migrations.Migration):
    atomic = False

    dependencies = [("registry", "0013_movement_checks")]

    operations = [migrations.RunPython(_forward, _backward, elidable=False)]
