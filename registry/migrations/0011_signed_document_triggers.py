"""Signed documents never change: database triggers on SQLite and PostgreSQL.

Once a document is ``signed`` (or ``superseded``):
- its frozen columns (the PDF bytes, their SHA-256 and size, the file path, code, revision, subject,
  preparer, checker, signer, certificate...) never change (``document_frozen``);
- its state only moves ``signed`` → ``superseded``, and ``out_of_date`` only from false to true
  (``document_standing``);
- the row is never deleted (``document_no_delete``).

``Document.save()`` / ``delete()`` check the same rules first for a clear message;
``tests/models/test_document_triggers.py`` checks that the column lists here equal the model's and
that the database refuses a change made behind the ORM's back. ``load_demo --reset`` lifts
``document_no_delete`` inside its transaction, as it does the audit and position guards.
"""

from django.db import migrations

ISSUED = ("signed", "superseded")
FROZEN = [
    "code", "kind", "mark_id", "job_id", "revision", "page_size", "content", "size_bytes", "sha256",
    "page_count", "signature_page", "signature_box", "pdf", "options", "created_by_id", "created_at",
    "checked_by_id", "checked_at", "check_note", "checked_sha256", "signed_by_id", "signed_at",
    "certificate_id", "supersedes_id",
]


def _in(values):
    return "(" + ", ".join(f"'{v}'" for v in values) + ")"


_STANDING_BAD = (
    "(OLD.state = 'superseded' AND NEW.state <> 'superseded')"
    " OR (OLD.state = 'signed' AND NEW.state NOT IN ('signed', 'superseded'))"
    " OR (OLD.out_of_date AND NOT NEW.out_of_date)"
)

SQLITE_FORWARD = [
    "CREATE TRIGGER document_frozen BEFORE UPDATE ON registry_document "
    f"WHEN OLD.state IN {_in(ISSUED)} AND ("
    + " OR ".join(f"NEW.{c} IS NOT OLD.{c}" for c in FROZEN)
    + ") BEGIN SELECT RAISE(ABORT, 'a signed document cannot change'); END",
    "CREATE TRIGGER document_standing BEFORE UPDATE ON registry_document "
    f"WHEN OLD.state IN {_in(ISSUED)} AND ({_STANDING_BAD}) "
    "BEGIN SELECT RAISE(ABORT, 'a signed document''s standing only moves forward'); END",
    "CREATE TRIGGER document_no_delete BEFORE DELETE ON registry_document "
    f"WHEN OLD.state IN {_in(ISSUED)} "
    "BEGIN SELECT RAISE(ABORT, 'signed and superseded documents are never deleted'); END",
]
SQLITE_BACKWARD = [
    "DROP TRIGGER IF EXISTS document_frozen",
    "DROP TRIGGER IF EXISTS document_standing",
    "DROP TRIGGER IF EXISTS document_no_delete",
]

PG_FORWARD = [
    """CREATE OR REPLACE FUNCTION registry_document_frozen() RETURNS trigger AS $$
       BEGIN
         IF OLD.state IN """
    + _in(ISSUED)
    + " AND ("
    + " OR ".join(f"NEW.{c} IS DISTINCT FROM OLD.{c}" for c in FROZEN)
    + """) THEN
           RAISE EXCEPTION 'document % is %: it cannot change', OLD.code, OLD.state;
         END IF;
         IF OLD.state IN """
    + _in(ISSUED)
    + " AND ("
    + _STANDING_BAD
    + """) THEN
           RAISE EXCEPTION 'document % is %: its standing only moves forward', OLD.code, OLD.state;
         END IF;
         RETURN NEW;
       END $$ LANGUAGE plpgsql""",
    """CREATE TRIGGER document_frozen BEFORE UPDATE ON registry_document
       FOR EACH ROW EXECUTE FUNCTION registry_document_frozen()""",
    """CREATE OR REPLACE FUNCTION registry_document_no_delete() RETURNS trigger AS $$
       BEGIN
         IF OLD.state IN """
    + _in(ISSUED)
    + """ THEN
           RAISE EXCEPTION 'document % is %: issued documents are never deleted', OLD.code, OLD.state;
         END IF;
         RETURN OLD;
       END $$ LANGUAGE plpgsql""",
    """CREATE TRIGGER document_no_delete BEFORE DELETE ON registry_document
       FOR EACH ROW EXECUTE FUNCTION registry_document_no_delete()""",
]
PG_BACKWARD = [
    "DROP TRIGGER IF EXISTS document_no_delete ON registry_document",
    "DROP FUNCTION IF EXISTS registry_document_no_delete()",
    "DROP TRIGGER IF EXISTS document_frozen ON registry_document",
    "DROP FUNCTION IF EXISTS registry_document_frozen()",
]


def _run(schema_editor, statements):
    for sql in statements:
        # params=None: no client-side %-formatting (the PL/pgSQL RAISE messages use % placeholders)
        schema_editor.execute(sql, params=None)


def forward(apps, schema_editor):
    vendor = schema_editor.connection.vendor
    if vendor == "sqlite":
        _run(schema_editor, SQLITE_FORWARD)
    elif vendor == "postgresql":
        _run(schema_editor, PG_FORWARD)


def backward(apps, schema_editor):
    vendor = schema_editor.connection.vendor
    if vendor == "sqlite":
        _run(schema_editor, SQLITE_BACKWARD)
    elif vendor == "postgresql":
        _run(schema_editor, PG_BACKWARD)


class Migration(migrations.Migration):
    dependencies = [("registry", "0010_signed_documents")]
    operations = [migrations.RunPython(forward, backward)]
