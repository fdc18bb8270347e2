"""The audit trail becomes tamper-evident: a hash chain, and a TRUNCATE guard on PostgreSQL.

Adds ``seq``, ``prev_hash`` and ``row_hash`` (registry/models/audit.py explains the chain), links
the rows already there in the order they were written (by id), and on PostgreSQL adds a
statement trigger that refuses TRUNCATE of the audit table (the row triggers of migration 0003
do not see TRUNCATE). The owner may still empty it on purpose, in a session that sets
``registry.audit_truncate`` to ``allow`` (the test suite's flush does); the application's runtime
role has no TRUNCATE right at all (deploy/README.md, "Database roles").

SQLite rebuilds the table for the new columns, which drops its triggers: they are recreated
here from migration 0003's own SQL.
"""

import importlib

import django.utils.timezone
from django.conf import settings
from django.db import migrations, models

PG_TRUNCATE_GUARD = [
    """CREATE OR REPLACE FUNCTION registry_audit_no_truncate() RETURNS trigger AS $$
       BEGIN
         IF coalesce(current_setting('registry.audit_truncate', true), '') = 'allow' THEN
           RETURN NULL;
         END IF;
         RAISE EXCEPTION 'audit trail is append-only: TRUNCATE refused';
       END $$ LANGUAGE plpgsql""",
    """CREATE TRIGGER audit_no_truncate BEFORE TRUNCATE ON registry_auditevent
       FOR EACH STATEMENT EXECUTE FUNCTION registry_audit_no_truncate()""",
]
PG_TRUNCATE_GUARD_BACKWARD = [
    "DROP TRIGGER IF EXISTS audit_no_truncate ON registry_auditevent",
    "DROP FUNCTION IF EXISTS registry_audit_no_truncate()",
]


def _sqlite_audit_triggers():
    triggers = importlib.import_module("registry.migrations.0003_integrity_triggers")
    return [sql for sql in triggers.SQLITE_FORWARD if "registry_auditevent" in sql]


def _link_existing(apps, schema_editor):
    import hashlib

    from registry.models.audit import GENESIS_HASH, chain_payload

    AuditEvent = apps.get_model("registry", "AuditEvent")
    seq, prev = 0, GENESIS_HASH
    for event in AuditEvent.objects.using(schema_editor.connection.alias).order_by("id").iterator(chunk_size=2000):
        seq += 1
        payload = chain_payload(
            seq=seq,
            at=event.at,
            actor_id=event.actor_id,
            action=event.action,
            object_type=event.object_type,
            object_id=event.object_id,
            object_repr=event.object_repr,
            mark_id=event.mark_id,
            before=event.before,
            after=event.after,
            note=event.note,
            prev_hash=prev,
        )
        digest = hashlib.sha256(payload).hexdigest()
        AuditEvent.objects.using(schema_editor.connection.alias).filter(pk=event.pk).update(
            seq=seq, prev_hash=prev, row_hash=digest
        )
        prev = digest


def forward(apps, schema_editor):
    vendor = schema_editor.connection.vendor
    if vendor == "sqlite":
        schema_editor.execute("DROP TRIGGER IF EXISTS audit_no_update")
        schema_editor.execute("DROP TRIGGER IF EXISTS audit_no_delete")
        _link_existing(apps, schema_editor)
        for sql in _sqlite_audit_triggers():
            schema_editor.execute(sql)
    elif vendor == "postgresql":
        schema_editor.execute("SET CONSTRAINTS ALL IMMEDIATE")
        schema_editor.execute("ALTER TABLE registry_auditevent DISABLE TRIGGER audit_append_only")
        _link_existing(apps, schema_editor)
        schema_editor.execute("SET CONSTRAINTS ALL IMMEDIATE")
        schema_editor.execute("ALTER TABLE registry_auditevent ENABLE TRIGGER audit_append_only")
        for sql in PG_TRUNCATE_GUARD:
            schema_editor.execute(sql)


def backward(apps, schema_editor):
    vendor = schema_editor.connection.vendor
    if vendor == "postgresql":
        for sql in PG_TRUNCATE_GUARD_BACKWARD:
            schema_editor.execute(sql)


def restore_sqlite_triggers(apps, schema_editor):
    """After SQLite rebuilt the table (migrating back), put the append-only triggers back."""
    if schema_editor.connection.vendor == "sqlite":
        schema_editor.execute("DROP TRIGGER IF EXISTS audit_no_update")
        schema_editor.execute("DROP TRIGGER IF EXISTS audit_no_delete")
        for sql in _sqlite_audit_triggers():
            schema_editor.execute(sql)


class Migration(migrations.Migration):
    dependencies = [
        ("registry", "0007_custom_grids"),
        migrations.swappable_dependency(settings.AUTH_USER_MODEL),
    ]

    operations = [
        # Going back this runs last, after SQLite rebuilt the table without the new columns.
        migrations.RunPython(migrations.RunPython.noop, restore_sqlite_triggers),
        migrations.AddField(
            model_name="auditevent",
            name="prev_hash",
            field=models.CharField(blank=True, default="", editable=False, max_length=64),
        ),
        migrations.AddField(
            model_name="auditevent",
            name="row_hash",
            field=models.CharField(blank=True, default="", editable=False, max_length=64),
        ),
        migrations.AddField(
            model_name="auditevent",
            name="seq",
            field=models.BigIntegerField(
                blank=True, editable=False, help_text="Place in the hash chain, from 1.", null=True
            ),
        ),
        migrations.AlterField(
            model_name="auditevent",
            name="at",
            field=models.DateTimeField(db_index=True, default=django.utils.timezone.now),
        ),
        migrations.AddConstraint(
            model_name="auditevent",
            constraint=models.UniqueConstraint(
                condition=models.Q(("seq__isnull", False)), fields=("seq",), name="audit_seq_unique"
            ),
        ),
        migrations.RunPython(forward, backward),
    ]
