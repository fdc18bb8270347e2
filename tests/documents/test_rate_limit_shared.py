"""The public pages' rate limit is counted in the database, so separate server processes share it.

Each "process" here is a thread with its own database connection (Django opens one per thread), the
way two gunicorn workers or two application servers each hold their own connection to the one
database. Runs on SQLite and PostgreSQL (DATABASE_URL).
"""

from __future__ import annotations

import threading

import pytest
from django.db import connection, connections
from django.test import RequestFactory

from registry.models import RequestCount
from registry.services.ratelimit import count_request
from registry.web import ratelimit

pytestmark = pytest.mark.django_db(transaction=True)

NOW_S = 1_796_000_000.0  # a fixed instant (2026-11-30), so the minute cannot roll over mid-test


def _in_own_connection(fn):
    """Run ``fn()`` in a new thread (a new database connection); return its result and that connection.

    The driver's connection object itself, kept alive by the caller: an ``id()`` of a closed, collected one
    may be given again to the next thread's connection."""
    out = {}

    def run():
        try:
            out["value"] = fn()
            out["conn"] = connection.connection
        finally:
            connections.close_all()

    t = threading.Thread(target=run)
    t.start()
    t.join()
    return out["value"], out["conn"]


def test_two_connections_share_one_count():
    a1, conn_a = _in_own_connection(lambda: count_request("verify", "203.0.113.7", now_s=NOW_S))
    b1, conn_b = _in_own_connection(lambda: count_request("verify", "203.0.113.7", now_s=NOW_S + 1))
    a2, _ = _in_own_connection(lambda: count_request("verify", "203.0.113.7", now_s=NOW_S + 2))
    assert conn_a is not conn_b
    assert (a1, b1, a2) == (1, 2, 3)
    # other clients and other pages count on their own
    assert count_request("verify", "198.51.100.1", now_s=NOW_S) == 1
    assert count_request("crl", "203.0.113.7", now_s=NOW_S) == 1
    assert RequestCount.objects.get(scope="verify", client="203.0.113.7").hits == 3


def test_the_limit_holds_across_processes(settings):
    settings.REGISTRY = {**settings.REGISTRY, "CLIENT_IP_HEADER": ""}
    request = RequestFactory().get("/verify/", REMOTE_ADDR="192.0.2.44")
    answers = [_in_own_connection(lambda: ratelimit.allow(request, "verify", 3))[0] for _ in range(5)]
    assert answers == [True, True, True, False, False]


def test_concurrent_requests_are_all_counted():
    if connection.vendor == "sqlite":
        pytest.skip("SQLite serialises writers; concurrency is exercised on PostgreSQL")
    barrier = threading.Barrier(6)
    results = []

    def hit():
        try:
            barrier.wait()
            for _ in range(10):
                results.append(count_request("verify", "192.0.2.9", now_s=NOW_S))
        finally:
            connections.close_all()

    threads = [threading.Thread(target=hit) for _ in range(6)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert sorted(results) == list(range(1, 61))  # every request counted once, none lost


def test_old_minutes_are_removed():
    count_request("verify", "192.0.2.1", now_s=NOW_S)
    count_request("verify", "192.0.2.1", now_s=NOW_S + 60)
    assert RequestCount.objects.count() == 2  # this minute and the previous one are kept
    count_request("verify", "192.0.2.1", now_s=NOW_S + 180)
    assert sorted(RequestCount.objects.values_list("minute", flat=True)) == [int(NOW_S // 60) + 3]
