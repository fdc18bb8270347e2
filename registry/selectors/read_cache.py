"""Reads that change only with an audit row, cached until the next one (the mark page, the mark list).

Every write in the registry goes through a service that appends one audit row in the same transaction
(``registry.services.audit``), so the newest audit row's id and time name the registry's state: a read
cached under that token is current until the next audited write, whichever mark it touched. The same
idea keys the cached job screening (``registry.services.screening_cache``).

- One query per request finds the token (the newest audit row, by primary key).
- What is cached is data (model instances, counts). The one exception is the mark list's table and
  pager (a ``{% cache %}`` fragment keyed on the address and this token), which holds nothing of the
  user: no name, no role-dependent link, no form token. The rest of every page is rendered for each
  request, with its own user, role and CSRF token. Access checks run before the cache is read.
- Django's default cache is per process (``LocMemCache``): each gunicorn worker keeps its own copy, and a
  deployment may set ``CACHES["default"]`` to a shared backend. Entries also expire after
  :data:`READ_CACHE_SECONDS`, which bounds how long a change made outside the services (the admin site,
  SQL), which writes no audit row, can go unseen.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable
from typing import Any, TypeVar

from django.core.cache import cache
from django.db import connections, router

from registry import dbprepared
from registry.models import AuditEvent

READ_CACHE_SECONDS = 300
KEY_PREFIX = "registry:read:v1"
T = TypeVar("T")


def audit_token() -> str:
    """``id@time`` of the newest audit row ('0' for an empty trail).

    Read with plain SQL (it runs on every cached page), prepared once per connection on PostgreSQL
    (``registry.dbprepared``), from the database the router reads audit rows from, which is the one the
    cached reads come from (the replica on lag-tolerant pages).
    """
    conn = connections[router.db_for_read(AuditEvent)]
    table = conn.ops.quote_name(AuditEvent._meta.db_table)
    sql = f"SELECT id, {conn.ops.quote_name('at')} FROM {table} ORDER BY id DESC LIMIT 1"
    last = dbprepared.fetchone(conn, "registry_audit_head", sql, [])
    return "0" if last is None else f"{last[0]}@{last[1]}"


def cached_read(name: str, parts: tuple[Any, ...], compute: Callable[[], T], *, token: str | None = None) -> T:
    """``compute()``, cached under ``name``, ``parts`` and the audit token (computed here unless given)."""
    token = audit_token() if token is None else token
    digest = hashlib.sha256(repr((parts, token)).encode()).hexdigest()[:32]
    key = f"{KEY_PREFIX}:{name}:{digest}"
    found = cache.get(key)
    if found is not None:
        return found
    value = compute()
    cache.set(key, value, READ_CACHE_SECONDS)
    return value
