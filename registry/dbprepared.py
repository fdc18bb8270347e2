"""Named prepared statements on PostgreSQL for the few plain SQL reads every signed-in request makes.

Django sends each query as text with its values in it (client-side binding), so PostgreSQL parses and
plans every one of them again. For most queries that costs little; the query reading a session with its
user, roles and permissions (``registry.sessions``) joins nine tables, and planning it cost PostgreSQL
about 0.3 ms of CPU per request (measured: 447 µs of server CPU per query as text, 133 µs prepared),
more than running it. Here such a query is prepared once per database connection (``PREPARE``) and then
run by name (``EXECUTE``) with the request's values: the same statement, the same rows.

- The ``PREPARE`` goes to the connection itself, not through Django's cursor, so it is not counted as
  one of the request's queries; it is not undone by a rolled-back transaction (PostgreSQL keeps
  prepared statements for the whole session), and a new connection (reconnect, recycled worker)
  prepares again.
- Other databases (SQLite) run the text as before.
- ``REGISTRY["DB_PREPARED_STATEMENTS"]`` off (``REGISTRY_DB_PREPARED_STATEMENTS=0``) runs the text on
  PostgreSQL too: needed behind a connection pooler that hands each transaction another server
  connection (PgBouncer's transaction mode), where a prepared statement may not exist on the next one.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from typing import Any

from django.conf import settings

_PLACEHOLDER = re.compile(r"%s")
_NAME = re.compile(r"[a-z_][a-z0-9_]{0,62}")


def enabled() -> bool:
    return bool(getattr(settings, "REGISTRY", {}).get("DB_PREPARED_STATEMENTS", True))


def _numbered(sql: str) -> str:
    """``%s`` placeholders as PostgreSQL's ``$1, $2, ...`` (the SQL has no other ``%``)."""
    if "%" in _PLACEHOLDER.sub("", sql):
        raise ValueError("a prepared query may hold no '%' but its placeholders")
    count = iter(range(1, 1000))
    return _PLACEHOLDER.sub(lambda _m: f"${next(count)}", sql)


def fetchone(conn, name: str, sql: str, params: Sequence[Any]) -> tuple | None:
    """The first row of ``sql`` with ``params`` on Django connection ``conn``, prepared as ``name``
    on PostgreSQL (one name per query text: the same name for another text would run the first)."""
    if conn.vendor != "postgresql" or not enabled():
        with conn.cursor() as cur:
            cur.execute(sql, params)
            return cur.fetchone()
    if not _NAME.fullmatch(name):
        raise ValueError(f"not a statement name: {name!r}")
    with conn.cursor() as cur:  # connects if need be
        raw = conn.connection
        known = getattr(conn, "_registry_prepared", None)
        if known is None or known[0] is not raw:  # a new connection has no prepared statements
            known = (raw, set())
            conn._registry_prepared = known
        if name not in known[1]:
            raw.execute(f"PREPARE {name} AS {_numbered(sql)}")
            known[1].add(name)
        cur.execute(f"EXECUTE {name} ({', '.join(['%s'] * len(params))})" if params else f"EXECUTE {name}", params)
        return cur.fetchone()
