"""Two PostgreSQL roles: an owner that migrates, a runtime role that only reads and writes rows.

A role that owns a table may TRUNCATE it and ``ALTER TABLE ... DISABLE TRIGGER``, which would let
the application's own login empty or rewrite the audit trail. So in production:

- the **owner** role (``registry_owner`` in ``deploy/postgres/provision.sql``, no login) owns the
  database and every table; ``manage.py migrate`` runs as it (``REGISTRY_DB_ROLE``: Django's
  PostgreSQL ``assume_role`` option, a ``SET ROLE`` after connecting);
- the **runtime** role (``registry``, the application's login) owns nothing. After every migrate
  run as the owner, :func:`grant_runtime_role` gives it (``REGISTRY_DB_RUNTIME_ROLE``):
  SELECT, INSERT, UPDATE, DELETE on the tables, use of the sequences, and on the audit table
  only INSERT and SELECT (no UPDATE, DELETE, TRUNCATE, REFERENCES or TRIGGER). It cannot disable
  triggers, because only an owner can.

System check ``registry.W030`` warns in production when the application's login owns the audit
table or may change or empty it.
"""

from __future__ import annotations

from django.db.backends.base.base import BaseDatabaseWrapper

AUDIT_TABLE = "registry_auditevent"
#: Privileges the runtime role must not hold on the audit table.
AUDIT_FORBIDDEN = ("UPDATE", "DELETE", "TRUNCATE", "REFERENCES", "TRIGGER")


def grant_runtime_role(connection: BaseDatabaseWrapper, role: str) -> None:
    """Give ``role`` the runtime privileges described in the module docstring (PostgreSQL only).

    Run as the owner of the tables (after ``migrate``); idempotent.
    """
    if connection.vendor != "postgresql":
        return
    q = connection.ops.quote_name(role)
    with connection.cursor() as cur:
        cur.execute("SELECT current_database()")
        (database,) = cur.fetchone()
        cur.execute(f"GRANT CONNECT ON DATABASE {connection.ops.quote_name(database)} TO {q}")
        cur.execute(f"GRANT USAGE ON SCHEMA public TO {q}")
        cur.execute(
            "SELECT c.relname FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace "
            "WHERE n.nspname = 'public' AND c.relkind IN ('r', 'p') AND pg_has_role(c.relowner, 'USAGE') "
            "ORDER BY c.relname"
        )
        tables = [row[0] for row in cur.fetchall()]
        for table in tables:
            t = connection.ops.quote_name(table)
            if table == AUDIT_TABLE:
                cur.execute(f"REVOKE ALL ON {t} FROM {q}")
                cur.execute(f"GRANT SELECT, INSERT ON {t} TO {q}")
            elif table == "django_migrations":
                cur.execute(f"REVOKE ALL ON {t} FROM {q}")
                cur.execute(f"GRANT SELECT ON {t} TO {q}")
            else:
                cur.execute(f"GRANT SELECT, INSERT, UPDATE, DELETE ON {t} TO {q}")
        cur.execute(
            "SELECT c.relname FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace "
            "WHERE n.nspname = 'public' AND c.relkind = 'S' AND pg_has_role(c.relowner, 'USAGE')"
        )
        for (sequence,) in cur.fetchall():
            cur.execute(f"GRANT USAGE, SELECT ON SEQUENCE {connection.ops.quote_name(sequence)} TO {q}")


def audit_table_risks(connection: BaseDatabaseWrapper) -> list[str]:
    """What the current login may do to the audit table that it should not (PostgreSQL), in words."""
    if connection.vendor != "postgresql":
        return []
    risks = []
    with connection.cursor() as cur:
        cur.execute(
            "SELECT pg_has_role(current_user, c.relowner, 'USAGE') FROM pg_class c "
            "JOIN pg_namespace n ON n.oid = c.relnamespace WHERE n.nspname = 'public' AND c.relname = %s",
            [AUDIT_TABLE],
        )
        row = cur.fetchone()
        if row is None:
            return []
        if row[0]:
            risks.append("it owns the audit table (it may empty it or switch its guards off)")
        for privilege in AUDIT_FORBIDDEN:
            cur.execute("SELECT has_table_privilege(current_user, %s, %s)", [AUDIT_TABLE, privilege])
            if cur.fetchone()[0] and not row[0]:
                risks.append(f"it holds {privilege} on the audit table")
    return risks


def grant_after_migrate(sender, *, using: str = "default", **kwargs) -> None:
    """``post_migrate`` receiver: re-grant the runtime role when ``REGISTRY_DB_RUNTIME_ROLE`` is set."""
    from django.conf import settings
    from django.db import connections

    role = getattr(settings, "REGISTRY", {}).get("DB_RUNTIME_ROLE", "")
    connection = connections[using]
    if role and connection.vendor == "postgresql":
        grant_runtime_role(connection, role)
