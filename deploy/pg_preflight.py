"""Check that a PostgreSQL URL can run the test suite, and say why not.

Used by ``deploy/test.sh`` before the PostgreSQL half of the tests. It connects
with the URL's credentials to ``template1`` (every role may connect there, and
that is where test databases are copied from) and checks, in order:

===  =============================================================
rc   meaning
===  =============================================================
0    ready: the role may create databases and template1 has PostGIS
2    the server refused the login (role missing, password, pg_hba)
3    no server answers at the URL's host and port
4    the role lacks CREATEDB (pytest-django creates ``test_<name>``)
5    the PostGIS extension is not available on the server at all
6    PostGIS is available but not created in template1
===  =============================================================

Usage: ``python deploy/pg_preflight.py [URL]`` (default: ``$DATABASE_URL``).
"""

from __future__ import annotations

import os
import sys

READY, LOGIN_REFUSED, UNREACHABLE, NO_CREATEDB, NO_POSTGIS_PACKAGE, NO_POSTGIS_TEMPLATE = 0, 2, 3, 4, 5, 6

_LOGIN_WORDS = ("password", "authentication", "does not exist", "pg_hba", "no password supplied")


def libpq_url(url: str) -> str:
    """dj-database-url accepts a few schemes libpq does not; map them to ``postgresql://``."""
    for scheme in ("postgis://", "pgsql://", "postgresql+psycopg://"):
        if url.startswith(scheme):
            return "postgresql://" + url[len(scheme) :]
    return url


def preflight(url: str) -> tuple[int, str]:
    import psycopg

    try:
        conn = psycopg.connect(libpq_url(url), dbname="template1", connect_timeout=5)
    except psycopg.OperationalError as exc:
        text = str(exc).strip().splitlines()[-1] if str(exc).strip() else repr(exc)
        lowered = str(exc).lower()
        if any(word in lowered for word in _LOGIN_WORDS):
            return LOGIN_REFUSED, f"login refused: {text}"
        return UNREACHABLE, f"no PostgreSQL server answers: {text}"
    with conn:
        row = conn.execute(
            "SELECT current_user, current_setting('server_version'), rolcreatedb OR rolsuper "
            "FROM pg_roles WHERE rolname = current_user"
        ).fetchone()
        user, version, can_create = row
        if not can_create:
            return NO_CREATEDB, f"role {user!r} lacks CREATEDB (needed to create the test database)"
        available = conn.execute(
            "SELECT default_version FROM pg_available_extensions WHERE name = 'postgis'"
        ).fetchone()
        if available is None:
            return NO_POSTGIS_PACKAGE, (
                f"PostGIS is not available on PostgreSQL {version}: install the package "
                f"postgresql-{version.split('.')[0]}-postgis-3 on the database server"
            )
        installed = conn.execute("SELECT extversion FROM pg_extension WHERE extname = 'postgis'").fetchone()
        if installed is None:
            return NO_POSTGIS_TEMPLATE, (
                "PostGIS is not created in template1, so test databases would lack it; as a superuser run: "
                "psql -d template1 -c 'CREATE EXTENSION postgis'"
            )
    return READY, f"role {user!r} on PostgreSQL {version}, CREATEDB, PostGIS {installed[0]} in template1"


def main(argv: list[str]) -> int:
    url = argv[1] if len(argv) > 1 else os.environ.get("DATABASE_URL", "")
    if not url:
        print("no URL given and DATABASE_URL is not set", file=sys.stderr)
        return UNREACHABLE
    rc, message = preflight(url)
    print(message)
    return rc


if __name__ == "__main__":
    sys.exit(main(sys.argv))
