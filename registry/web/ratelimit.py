"""A per-client rate limit for public pages (the verification page, the revocation list).

Fixed one-minute windows counted in the database (``registry.services.ratelimit``), so that the limit
holds across every gunicorn worker and every application server. The client is its address as the
sign-in throttle takes it (``registry.services.signin.client_address``: ``REGISTRY_CLIENT_IP_HEADER``
when the proxy sets it, else ``REMOTE_ADDR``).
"""

from __future__ import annotations

from registry.services.ratelimit import count_request
from registry.services.signin import client_address


def allow(request, scope: str, per_minute: int) -> bool:
    """Count this request against ``scope``; False when the client is over ``per_minute`` this minute."""
    if per_minute <= 0:
        return True
    return count_request(scope, client_address(request)) <= per_minute
