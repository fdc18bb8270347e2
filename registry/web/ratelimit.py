"""A small per-client rate limit for public pages (fixed one-minute windows in Django's cache).

The client is the request's ``REMOTE_ADDR`` (behind ``deploy/nginx/registry.conf`` nginx passes the
real address; the application does not trust ``X-Forwarded-For``). With several application processes,
configure a shared cache (database or Redis) so that the limit holds across them; with the default
local-memory cache each process counts on its own.
"""

from __future__ import annotations

import time

from django.core.cache import cache


def allow(request, scope: str, per_minute: int) -> bool:
    """Count this request against ``scope``; False when the client is over ``per_minute`` this minute."""
    if per_minute <= 0:
        return True
    client = request.META.get("REMOTE_ADDR", "") or "unknown"
    window = int(time.time() // 60)
    key = f"ratelimit:{scope}:{client}:{window}"
    if cache.add(key, 1, timeout=90):
        return True
    try:
        count = cache.incr(key)
    except ValueError:  # expired between add and incr
        cache.add(key, 1, timeout=90)
        return True
    return count <= per_minute
