"""Database triggers for invariants that CHECK constraints cannot express.

- The audit trail is append-only: UPDATE and DELETE on ``registry_auditevent`` fail.
- A published or superseded position never changes its coordinates, covariance,
  velocity, frame, epoch or source.
Both SQLite and PostgreSQL get the same rules.
"""

from django.db import migrations

FROZEN = [
    "mark_id", "frame_epsg", "epoch_yr", "lat_deg", "lon_deg", "h_m",
    "cov_ee_m2", "cov_en_m2", "cov_eu_m2", "cov_nn_m2", "cov_nu_m2", "cov_uu_m2",
    "vel_e_m_yr", "vel_n_m_yr", "vel_u_m_yr",
    "vel_sigma_e_m_yr", "vel_sigma_n_m_yr", "vel_sigma_u_m_yr", "source",
]

SQLITE_FORWARD = [
    """CREATE TRIGGER audit_no_update BEFORE UPDATE ON registry_auditevent
       BEGIN SELECT RAISE(ABORT, 'audit trail is append-only'); END""",
    """CREATE TRIGGER audit_no_delete BEFORE DELETE ON registry_auditevent
       BEGIN SELECT RAISE(ABORT, 'audit trail is append-only'); END""",
    "CREATE TRIGGER position_frozen BEFORE UPDATE ON registry_position "
    "WHEN OLD.state IN ('published', 'superseded') AND ("
    + " OR ".join(f"NEW.{c} IS NOT OLD.{c}" for c in FROZEN)
    + ") BEGIN SELECT RAISE(ABORT, 'a published or superseded position cannot change'); END",
]
SQLITE_BACKWARD = [
    "DROP TRIGGER IF EXISTS audit_no_update",
    "DROP TRIGGER IF EXISTS audit_no_delete",
    "DROP TRIGGER IF EXISTS position_frozen",
]

PG_FORWARD = [
    """CREATE OR REPLACE FUNCTION registry_audit_append_only() RETURNS trigger AS $$
       BEGIN RAISE EXCEPTION 'audit trail is append-only'; END $$ LANGUAGE plpgsql""",
    """CREATE TRIGGER audit_append_only BEFORE UPDATE OR DELETE ON registry_auditevent
       FOR EACH ROW EXECUTE FUNCTION registry_audit_append_only()""",
    """CREATE OR REPLACE FUNCTION registry_position_frozen() RETURNS trigger AS $$
       BEGIN
         IF OLD.state IN ('published', 'superseded') AND ("""
    + " OR ".join(f"NEW.{c} IS DISTINCT FROM OLD.{c}" for c in FROZEN)
    + """) THEN
           RAISE EXCEPTION 'a published or superseded position cannot change';
         END IF;
         RETURN NEW;
       END $$ LANGUAGE plpgsql""",
    """CREATE TRIGGER position_frozen BEFORE UPDATE ON registry_position
       FOR EACH ROW EXECUTE FUNCTION registry_position_frozen()""",
]
PG_BACKWARD = [
    "DROP TRIGGER IF EXISTS audit_append_only ON registry_auditevent",
    "DROP FUNCTION IF EXISTS registry_audit_append_only()",
    "DROP TRIGGER IF EXISTS position_frozen ON registry_position",
    "DROP FUNCTION IF EXISTS registry_position_frozen()",
]


def _run(schema_editor, statements):
    for sql in statements:
        schema_editor.execute(sql)


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
    dependencies = [("registry", "0002_spatial_search")]
    operations = [migrations.RunPython(forward, backward)]
