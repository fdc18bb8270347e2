"""The public verification page's rate limit holds across application servers: requests from one client
address, sent in turn to the office's two gunicorn servers (two workers each, every one its own process
and database connection), are counted together, so the client gets exactly the configured number of
answers per minute in all, not that number per process."""

from __future__ import annotations

import random
import time

import pytest

pytestmark = pytest.mark.scaleout


def test_verification_limit_is_shared_by_both_app_servers(office):
    import requests

    limit = int(office.env.get("REGISTRY_VERIFY_RATE_PER_MIN", "30"))
    if time.time() % 60 > 35:  # stay inside one clock minute (the limit's window)
        time.sleep(61 - time.time() % 60)
    # A documentation address (RFC 5737) of its own, so no other test's requests count against it; the
    # servers take the client's address from X-Real-IP in production and fall back to the connection's.
    client = f"198.51.100.{random.randint(1, 254)}"
    s = requests.Session()
    s.trust_env = False
    try:
        codes = [
            s.get(office.app_url(i % 2) + "/verify/", headers={"X-Real-IP": client}, timeout=30).status_code
            for i in range(limit + 4)
        ]
        counted = office.primary.psql("SELECT count(*) FROM registry_requestcount WHERE client = '127.0.0.1'")
    finally:  # the office is shared by the session's other tests: leave no spent budget behind
        office.primary.psql("DELETE FROM registry_requestcount")
    assert codes[:limit] == [200] * limit, codes
    assert codes[limit:] == [429] * 4, codes  # on both servers
    assert counted.strip() == "0"  # counted against the client's own address, not the proxy's
