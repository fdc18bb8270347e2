"""Positions are history: database triggers for deletes and state changes (both SQLite and PostgreSQL).

- A published, superseded or withdrawn position is never deleted (``position_history_no_delete``).
- A position's state moves only forward: proposed → published | rejected, published → superseded |
  withdrawn; any other change (superseded → published, published → proposed, rejected → ...) is
  refused (``position_state_transition``).
- The frozen fields of migration 0003 stay frozen after a withdrawal too (``position_frozen`` is
  recreated for published, superseded and withdrawn positions).

``Position.save()`` / ``delete()`` and the position queryset check the same rules first, so the ORM gives
a clear message; ``tests/models/test_position_history.py`` checks that the lists here equal the model's.
``load_demo --reset`` lifts ``position_history_no_delete`` inside its transaction (as it does the audit
guard) and restores it before committing.
"""

import importlib

from django.db import migrations

_0003 = importlib.import_module("registry.migrations.0003_integrity_triggers")
FROZEN = list(_0003.FROZEN)
HISTORY_STATES = ["published", "superseded", "withdrawn"]
TRANSITIONS = {"proposed": ["published", "rejected"], "published": ["superseded", "withdrawn"]}


def _in(values):
    return "(" + ", ".join(f"'{v}'" for v in values) + ")"


_ALLOWED = " OR ".join(f"(OLD.state = '{old}' AND NEW.state IN {_in(new)})" for old, new in TRANSITIONS.items())

SQLITE_FORWARD = [
    "DROP TRIGGER IF EXISTS position_frozen",
    "CREATE TRIGGER position_frozen BEFORE UPDATE ON registry_position "
    f"WHEN OLD.state IN {_in(HISTORY_STATES)} AND ("
    + " OR ".join(f"NEW.{c} IS NOT OLD.{c}" for c in FROZEN)
    + ") BEGIN SELECT RAISE(ABORT, 'a published, superseded or withdrawn position cannot change'); END",
    "CREATE TRIGGER position_state_transition BEFORE UPDATE ON registry_position "
    f"WHEN NEW.state IS NOT OLD.state AND NOT ({_ALLOWED}) "
    "BEGIN SELECT RAISE(ABORT, 'this position state change is not allowed'); END",
    "CREATE TRIGGER position_history_no_delete BEFORE DELETE ON registry_position "
    f"WHEN OLD.state IN {_in(HISTORY_STATES)} "
    "BEGIN SELECT RAISE(ABORT, 'published, superseded and withdrawn positions are never deleted'); END",
]
SQLITE_BACKWARD = [
    "DROP TRIGGER IF EXISTS position_history_no_delete",
    "DROP TRIGGER IF EXISTS position_state_transition",
    *_0003.SQLITE_BACKWARD[2:],  # position_frozen
    *[sql for sql in _0003.SQLITE_FORWARD if "position_frozen" in sql],
]

PG_FORWARD = [
    """CREATE OR REPLACE FUNCTION registry_position_frozen() RETURNS trigger AS $$
       BEGIN
         IF OLD.state IN """
    + _in(HISTORY_STATES)
    + " AND ("
    + " OR ".join(f"NEW.{c} IS DISTINCT FROM OLD.{c}" for c in FROZEN)
    + """) THEN
           RAISE EXCEPTION 'position % is %: it cannot change', OLD.id, OLD.state;
         END IF;
         RETURN NEW;
       END $$ LANGUAGE plpgsql""",
    """CREATE OR REPLACE FUNCTION registry_position_state_transition() RETURNS trigger AS $$
       BEGIN
         IF NEW.state IS DISTINCT FROM OLD.state AND NOT ("""
    + _ALLOWED
    + """) THEN
           RAISE EXCEPTION 'position % cannot change state from % to %', OLD.id, OLD.state, NEW.state;
         END IF;
         RETURN NEW;
       END $$ LANGUAGE plpgsql""",
    """CREATE TRIGGER position_state_transition BEFORE UPDATE ON registry_position
       FOR EACH ROW EXECUTE FUNCTION registry_position_state_transition()""",
    """CREATE OR REPLACE FUNCTION registry_position_history_no_delete() RETURNS trigger AS $$
       BEGIN
         IF OLD.state IN """
    + _in(HISTORY_STATES)
    + """ THEN
           RAISE EXCEPTION 'position % is %: published, superseded and withdrawn positions are never deleted',
             OLD.id, OLD.state;
         END IF;
         RETURN OLD;
       END $$ LANGUAGE plpgsql""",
    """CREATE TRIGGER position_history_no_delete BEFORE DELETE ON registry_position
       FOR EACH ROW EXECUTE FUNCTION registry_position_history_no_delete()""",
]
PG_BACKWARD = [
    "DROP TRIGGER IF EXISTS position_history_no_delete ON registry_position",
    "DROP FUNCTION IF EXISTS registry_position_history_no_delete()",
    "DROP TRIGGER IF EXISTS position_state_transition ON registry_position",
    "DROP FUNCTION IF EXISTS registry_position_state_transition()",
    # position_frozen: back to migration 0003's function (published and superseded only)
    *[sql for sql in _0003.PG_FORWARD if "CREATE OR REPLACE FUNCTION registry_position_frozen()" in sql],
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
    dependencies = [("registry", "0004_roles")]
    operations = [migrations.RunPython(forward, backward)]
