"""System checks for the environment the registry relies on.

Each check has a stable id (``registry.E0xx`` / ``registry.W0xx``) and a hint.
Modules add their own checks here; ids are never reused.
"""

from __future__ import annotations

from django.core.checks import Error, Tags, Warning, register
from django.db import connections


@register(Tags.database, deploy=True)
def check_postgis(app_configs=None, databases=None, **kwargs):
    """registry.E001: on PostgreSQL the PostGIS extension must be installed."""
    errors = []
    for alias in databases or []:
        conn = connections[alias]
        if conn.vendor != "postgresql":
            continue
        try:
            with conn.cursor() as cur:
                cur.execute("SELECT extversion FROM pg_extension WHERE extname = 'postgis'")
                row = cur.fetchone()
        except Exception as exc:  # database unreachable: Django reports that itself
            errors.append(Warning(f"Could not query PostGIS on '{alias}': {exc}", id="registry.W001"))
            continue
        if row is None:
            errors.append(
                Error(
                    f"PostGIS is not installed in database '{alias}'.",
                    hint="Install postgresql-15-postgis-3 and run 'python manage.py migrate' "
                    "(the first migration creates the extension).",
                    id="registry.E001",
                )
            )
    return errors
