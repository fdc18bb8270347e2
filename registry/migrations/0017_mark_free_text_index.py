"""One trigram index for the mark list's free-text filter, and an index on the monument kind (PostgreSQL only).

The free-text filter asks, for every word, whether it occurs in the code, name, marking, keeper or
"how it is set" of a mark (``registry.selectors.marks.mark_filter``). Asked column by column, one of
them without an index, it read all the rows (2 to 6 s at a million marks). A word has no space in it,
so it occurs in one of those columns exactly when it occurs in all of them joined by spaces: one GIN
index (``pg_trgm``) on that joined text, upper-cased as the case-insensitive comparison is, answers
each word. A word that names a kind of monument also matches marks of that kind, served by the B-tree
on ``monument``. Built ``CONCURRENTLY`` (the migration is not atomic), then ``ANALYZE`` for the
planner's statistics on the new expression. On SQLite the migration does nothing.
"""

from django.db import migrations

#: The joined text; registry.selectors.marks.FREE_TEXT_SQL is the same expression (a test checks it).
FREE_TEXT_SQL = (
    "UPPER(code::text || ' ' || name::text || ' ' || marking::text || ' ' || keeper::text"
    " || ' ' || monument_detail::text)"
)


def _forward(apps, schema_editor):
    if schema_editor.connection.vendor != "postgresql":
        return
    schema_editor.execute("CREATE EXTENSION IF NOT EXISTS pg_trgm")
    schema_editor.execute(
        f"CREATE INDEX CONCURRENTLY IF NOT EXISTS mark_free_text_trgm ON registry_mark USING gin (({FREE_TEXT_SQL}) gin_trgm_ops)"
    )
    schema_editor.execute("CREATE INDEX CONCURRENTLY IF NOT EXISTS mark_monument ON registry_mark (monument)")
    schema_editor.execute("ANALYZE registry_mark")


def _backward(apps, schema_editor):
    if schema_editor.connection.vendor != "postgresql":
        return
    schema_editor.execute("DROP INDEX CONCURRENTLY IF EXISTS mark_monument")
    schema_editor.execute("DROP INDEX CONCURRENTLY IF EXISTS mark_free_text_trgm")


class Migration(migrations.Migration):
    atomic = False

    dependencies = [("registry", "0016_request_counts")]

    operations = [migrations.RunPython(_forward, _backward, elidable=False)]
