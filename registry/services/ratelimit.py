"""Per-client request counts for rate-limited public pages, shared by every application server.

A fixed one-minute window per (page, client address): each request adds one to its window's row with a
single atomic upsert (``INSERT ... ON CONFLICT DO UPDATE ... RETURNING``, on SQLite ≥ 3.35 and
PostgreSQL), so concurrent requests on any number of gunicorn workers and machines are all counted and
none is lost. The count lives in the database every server already shares, not in Django's per-process
cache. The first request of a new minute removes the rows of minutes before the previous one.
"""

from __future__ import annotations

import time

from django.db import connections, router

from registry.models import RequestCount

#: Longest client string stored (an IPv6 address in text is at most 45 characters).
_CLIENT_MAX = 64


def count_request(scope: str, client: str, *, now_s: float | None = None) -> int:
    """Add one request of ``client`` to ``scope`` in the current minute; return the minute's count so far."""
    minute = int((time.time() if now_s is None else now_s) // 60)
    alias = router.db_for_write(RequestCount)
    conn = connections[alias]
    table = conn.ops.quote_name(RequestCount._meta.db_table)
    with conn.cursor() as cursor:
        cursor.execute(
            f"INSERT INTO {table} (scope, client, minute, hits) VALUES (%s, %s, %s, 1) "  # noqa: S608 (table name from the model)
            f"ON CONFLICT (scope, client, minute) DO UPDATE SET hits = {table}.hits + 1 RETURNING hits",
            [scope[:40], (client or "unknown")[:_CLIENT_MAX], minute],
        )
        hits = int(cursor.fetchone()[0])
    if hits == 1:
        RequestCount.objects.using(alias).filter(minute__lt=minute - 1).delete()
    return hits
