"""Background workers on several processes: a worker killed in the middle of a task (SIGKILL: no
chance to clean up) leaves nothing half-done, and another worker runs the task again to its end
(registry/services/workers.py, ``manage.py task_worker``), on the office of tests/scaleout/conftest.py."""

from __future__ import annotations

import json
import os
import signal
import sys
import time

import pytest

pytestmark = pytest.mark.scaleout

TASKS = "django_tasks_database_dbtaskresult"


def _task_row(office, task_id: str) -> tuple[str, list[str]]:
    row = office.primary.psql(f"SELECT status || '|' || worker_ids::text FROM {TASKS} WHERE id = '{task_id}'")
    status, _, ids = row.partition("|")
    return status, json.loads(ids)


def test_a_killed_workers_task_is_run_again_and_never_half_done(office):
    out = office.manage(
        "shell",
        "-c",
        "from tests.scaleout.office_tasks import two_marks_slowly as t; print(t.enqueue('KILL', 6).id)",
    ).stdout
    task_id = out.strip().splitlines()[-1]

    # Wait until a worker runs it and has written the first mark (not committed: invisible to others).
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        status, workers = _task_row(office, task_id)
        if status == "RUNNING" and workers:
            break
        time.sleep(0.1)
    else:
        pytest.fail("no worker took the task: " + office.log_text("worker0") + office.log_text("worker1"))
    time.sleep(1.5)
    first = workers[-1]
    pid = int(first.split(":")[1])
    name = next(n for n, p in office.procs.items() if n.startswith("worker") and p.pid == pid)
    os.kill(pid, signal.SIGKILL)
    office.procs[name].wait(10)
    assert office.primary.psql("SELECT count(*) FROM registry_mark WHERE code LIKE 'KILL-%'") == "0"

    # The other worker notices (its liveness check every 2 s here) and runs the task again.
    t0 = time.monotonic()
    deadline = t0 + 90
    while time.monotonic() < deadline:
        status, workers = _task_row(office, task_id)
        if status in ("SUCCESSFUL", "FAILED"):
            break
        time.sleep(0.2)
    print(f"\ntask finished {time.monotonic() - t0:.1f} s after its worker was killed; runs by {workers}")
    try:
        assert status == "SUCCESSFUL", office.log_text("worker0") + office.log_text("worker1")
        assert len(workers) == 2 and workers[0] == first and workers[1] != first
        # Both marks, once each, with one audit row each: the killed run left nothing behind.
        assert (
            office.primary.psql(
                "SELECT string_agg(code, ',' ORDER BY code) FROM registry_mark WHERE code LIKE 'KILL-%'"
            )
            == "KILL-1,KILL-2"
        )
        assert (
            office.primary.psql(
                "SELECT count(*) FROM registry_auditevent a JOIN registry_mark m ON a.object_id = m.id::text "
                "WHERE a.action = 'mark_create' AND m.code LIKE 'KILL-%'"
            )
            == "2"
        )
        assert office.manage("verify_audit").returncode == 0
    finally:
        office.spawn(name, [sys.executable, "manage.py", "task_worker", "--interval", "0.5", "--no-startup-delay"])
