"""What the benchmark scripts share: their own PostgreSQL database, and marks bulk-loaded fast.

Imported by the scripts as ``benchcommon`` (they run as ``python benchmarks/<script>.py``, so this folder
is first on the path).
"""

from __future__ import annotations

import datetime as dt


def ensure_pg_database(url: str) -> None:
    """Create the database named at the end of ``url`` unless it exists (through the server's ``postgres``)."""
    import psycopg

    dbname = url.rsplit("/", 1)[1]
    admin = url.rsplit("/", 1)[0] + "/postgres"
    with psycopg.connect(admin, autocommit=True) as conn:
        if not conn.execute("SELECT 1 FROM pg_database WHERE datname = %s", [dbname]).fetchone():
            conn.execute(f'CREATE DATABASE "{dbname}"')


def load_mark_rows(columns, rows, vendor: str, *, pg_analyze: str = "ANALYZE registry_mark") -> None:
    """Replace every row of ``registry_mark`` with ``rows`` (tuples in ``columns`` order), the fast way:
    COPY on PostgreSQL (then ``pg_analyze``), one ``executemany`` transaction on SQLite (then ANALYZE)."""
    from django.db import connection

    with connection.cursor() as cur:
        cur.execute("DELETE FROM registry_mark")
    if vendor == "postgresql":
        raw = connection.connection  # psycopg 3 connection under Django
        with raw.cursor() as cur:
            with cur.copy(f"COPY registry_mark ({', '.join(columns)}) FROM STDIN") as copy:
                for row in rows:
                    copy.write_row(row)
        raw.commit()
        with connection.cursor() as cur:
            cur.execute(pg_analyze)
    else:
        raw = connection.connection  # sqlite3 connection
        placeholders = ", ".join("?" for _ in columns)
        raw.execute("BEGIN")
        raw.executemany(
            f"INSERT INTO registry_mark ({', '.join(columns)}) VALUES ({placeholders})",
            ([v.isoformat(" ") if isinstance(v, dt.datetime) else v for v in row] for row in rows),
        )
        raw.execute("COMMIT")
        raw.execute("ANALYZE")
