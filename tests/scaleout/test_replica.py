"""A PostgreSQL streaming replica behind the database router (registry/dbrouter.py), on a real pair of
clusters (tests/scaleout/conftest.py): lag-tolerant reads come from the replica, a client's own reads right
after its writes come from the primary, and a replica that is down leaves reads to the primary.

The replica's WAL replay is paused (``pg_wal_replay_pause()``) to make it visibly behind: a mark written
then is on the primary only, so whether a list shows it says which database answered.
"""

from __future__ import annotations

import contextlib
import time

import pytest

from tests.scaleout.conftest import api

pytestmark = pytest.mark.scaleout


def _codes(response) -> set[str]:
    assert response.status_code == 200, response.text[:500]
    return {row["code"] for row in response.json()["results"]}


def _list(session, q: str):
    return session.get(session.base + "/api/marks/", params={"q": q}, timeout=30)


def _create(session, code: str):
    r = session.post(session.base + "/api/marks/", json={"code": code, "name": f"Replica test {code}"}, timeout=30)
    assert r.status_code == 201, r.text[:500]
    return r


def _caught_up(office, timeout_s: float = 30.0) -> float:
    """Wait until the replica has replayed everything the primary wrote; returns the seconds it took."""
    target = office.primary.psql("SELECT pg_current_wal_lsn()")
    t0 = time.monotonic()
    while time.monotonic() - t0 < timeout_s:
        if office.replica.psql(f"SELECT pg_last_wal_replay_lsn() >= '{target}'::pg_lsn") == "t":
            return time.monotonic() - t0
        time.sleep(0.02)
    raise AssertionError("the replica did not catch up within 30 s")


@contextlib.contextmanager
def replica_paused(office):
    office.replica.psql("SELECT pg_wal_replay_pause()")
    try:
        yield
    finally:
        office.replica.psql("SELECT pg_wal_replay_resume()")


def test_replication_lag_is_small(office):
    """A committed mark reaches the replica quickly (the figure is printed; the bound is generous)."""
    manager = api(office, "manager")
    lags = []
    for i in range(5):
        _create(manager, f"LAG-{i}")
        lags.append(_caught_up(office))
    lags.sort()
    print(f"\nreplica lag after a write: median {lags[2] * 1000:.0f} ms, worst {lags[-1] * 1000:.0f} ms")
    assert lags[-1] < 5.0
    assert office.replica.psql("SELECT count(*) FROM registry_mark WHERE code LIKE 'LAG-%'") == "5"


def test_lists_and_searches_read_from_the_replica(office):
    manager, viewer = api(office, "manager"), api(office, "viewer")
    _caught_up(office)
    with replica_paused(office):
        _create(manager, "RPL-A")
        # Another client's search is lag-tolerant: the paused replica answers, without the new mark.
        assert "RPL-A" not in _codes(_list(viewer, "RPL-A"))
        # A mark's own page is not: the primary answers.
        assert viewer.get(viewer.base + "/api/marks/RPL-A/", timeout=30).status_code == 200
        # The public verification page is served from the replica too (the sheet signed before the pause).
        code = office.primary.psql("SELECT code FROM registry_document WHERE state = 'signed' LIMIT 1")
        page = viewer.get(office.app_url(1) + f"/verify/{code}/", timeout=30)
        assert page.status_code == 200 and code in page.text
    _caught_up(office)
    assert "RPL-A" in _codes(_list(viewer, "RPL-A"))


def test_a_clients_own_reads_after_a_write_come_from_the_primary(office):
    manager, viewer = api(office, "manager"), api(office, "viewer")
    _caught_up(office)
    with replica_paused(office):
        _create(manager, "RPL-B")
        assert "RPL-B" in _codes(_list(manager, "RPL-B"))  # the writer sees its own write at once
        assert "RPL-B" not in _codes(_list(viewer, "RPL-B"))  # others may see it a little later
        time.sleep(3.3)  # REGISTRY_REPLICA_PIN_SECONDS=3 in this office
        assert "RPL-B" not in _codes(_list(manager, "RPL-B"))  # after the pin: the replica again
    _caught_up(office)


def test_reads_fall_back_to_the_primary_when_the_replica_is_down(office):
    manager, viewer = api(office, "manager"), api(office, "viewer")
    office.replica.stop("immediate")
    try:
        _create(manager, "RPL-C")
        t0 = time.monotonic()
        assert "RPL-C" in _codes(_list(viewer, "RPL-C"))
        first_s = time.monotonic() - t0
        for server in (0, 1):  # every application server, every process: answers, from the primary
            for _ in range(4):
                other = api(office, "viewer", server)
                assert "RPL-C" in _codes(_list(other, "RPL-C"))
        print(f"\nfirst list with the replica down: {first_s * 1000:.0f} ms")
        assert first_s < 10
    finally:
        office.replica.start()
    _caught_up(office, 60)
    time.sleep(2.2)  # REGISTRY_REPLICA_RETRY_SECONDS=2: the replica is tried again
    with replica_paused(office):
        _create(manager, "RPL-D")
        for _ in range(4):  # every gunicorn worker of this server has noticed the replica is back
            assert "RPL-D" not in _codes(_list(api(office, "viewer"), "RPL-D"))
    _caught_up(office)
