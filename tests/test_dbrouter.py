"""The database router's decisions (registry/dbrouter.py), without a real replica: which requests may read
from it, the pin after a write, the fall-back when it fails midway. The real streaming replica is tested in
tests/scaleout/test_replica.py (PostgreSQL)."""

from __future__ import annotations

import time

import pytest
from django.contrib.auth.models import User
from django.db import OperationalError
from django.http import HttpResponse
from django.test import RequestFactory
from django.urls import resolve

from registry import dbrouter
from registry.models import Mark


@pytest.fixture
def replica_up(monkeypatch):
    monkeypatch.setattr(dbrouter, "replica_configured", lambda: True)
    monkeypatch.setattr(dbrouter, "replica_usable", lambda: True)


def _run(path: str, *, method: str = "get", cookies: dict | None = None, view=None):
    seen = []

    def default_view(request, *args, **kwargs):
        seen.append(
            (
                dbrouter.current_read_alias(),
                dbrouter.ReplicaRouter().db_for_read(Mark),
                dbrouter.ReplicaRouter().db_for_read(User),
            )
        )
        return HttpResponse("ok")

    request = getattr(RequestFactory(), method)(path)
    request.COOKIES.update(cookies or {})
    request.resolver_match = resolve(path)
    the_view = view or default_view

    def handler(r):  # what Django's handler does: the middleware's process_view, else the view itself
        return middleware.process_view(r, the_view, (), {}) or the_view(r)

    middleware = dbrouter.ReplicaReadsMiddleware(handler)
    response = middleware(request)
    return seen, response


def test_without_a_replica_everything_reads_the_primary():
    seen, response = _run("/marks/")
    assert seen == [("default", "default", "default")]
    assert dbrouter.PIN_COOKIE not in response.cookies


def test_lists_read_the_replica_but_never_sign_in_tables(replica_up):
    seen, _ = _run("/api/marks/")
    assert seen == [("replica", "replica", "default")]  # a mark from the replica, a user from the primary
    assert dbrouter.current_read_alias() == "default"  # only for that request


def test_a_marks_own_page_and_writes_read_the_primary(replica_up):
    assert _run("/api/marks/ASH-024/")[0] == [("default", "default", "default")]
    seen, response = _run("/api/marks/", method="post")
    assert seen == [("default", "default", "default")]
    until = float(response.cookies[dbrouter.PIN_COOKIE].value)
    assert time.time() + 5 < until <= time.time() + 10.5  # REGISTRY_REPLICA_PIN_SECONDS default 10


def test_after_a_write_the_client_reads_the_primary_until_the_pin_ends(replica_up):
    pinned = {dbrouter.PIN_COOKIE: f"{time.time() + 5:.3f}"}
    assert _run("/api/marks/", cookies=pinned)[0] == [("default", "default", "default")]
    expired = {dbrouter.PIN_COOKIE: f"{time.time() - 1:.3f}"}
    assert _run("/api/marks/", cookies=expired)[0] == [("replica", "replica", "default")]
    assert _run("/api/marks/", cookies={dbrouter.PIN_COOKIE: "not a number"})[0][0][0] == "replica"


def test_a_replica_that_is_not_usable_leaves_reads_to_the_primary(monkeypatch):
    monkeypatch.setattr(dbrouter, "replica_configured", lambda: True)
    monkeypatch.setattr(dbrouter, "replica_usable", lambda: False)
    assert _run("/api/marks/")[0] == [("default", "default", "default")]


def test_a_replica_failing_midway_is_answered_again_from_the_primary(replica_up, monkeypatch):
    downs = []
    monkeypatch.setattr(dbrouter, "mark_replica_down", lambda reason="": downs.append(reason))
    monkeypatch.setattr(dbrouter, "_replica_failed", lambda exc: True)
    calls = []

    def view(request):
        calls.append(dbrouter.current_read_alias())
        if calls == ["replica"]:
            raise OperationalError("server closed the connection unexpectedly")
        return HttpResponse("from " + dbrouter.current_read_alias())

    _, response = _run("/api/marks/", view=view)
    assert calls == ["replica", "default"] and response.content == b"from default"
    assert downs and "server closed" in downs[0]


def test_the_health_check_backs_off_after_a_failure(monkeypatch):
    monkeypatch.setattr(dbrouter, "replica_configured", lambda: True)
    dbrouter.health.reset()
    calls = []

    def failing():
        calls.append(1)
        raise OperationalError("connection refused")

    monkeypatch.setattr(dbrouter, "replica_lag_seconds", failing)
    try:
        assert dbrouter.replica_usable() is False
        assert dbrouter.replica_usable() is False  # within REGISTRY_REPLICA_RETRY_SECONDS: not asked again
        assert calls == [1]
        dbrouter.health.reset()
        monkeypatch.setattr(dbrouter, "replica_lag_seconds", lambda: 45.0)  # behind more than 30 s
        assert dbrouter.replica_usable() is False
        monkeypatch.setattr(dbrouter, "replica_lag_seconds", lambda: 0.2)
        dbrouter.health.reset()
        assert dbrouter.replica_usable() is True
    finally:
        dbrouter.health.reset()
