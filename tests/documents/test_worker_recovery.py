"""A task whose worker was killed (registry/services/workers.py): queued again while runs remain, then
failed with the reason on its document build; a task whose worker is alive is left alone. On SQLite the
worker's process id tells; on PostgreSQL its advisory lock does (both halves of the suite run this)."""

from __future__ import annotations

import datetime as dt
import os
import subprocess

import pytest
from django.utils import timezone
from django_tasks_db.models import DBTaskResult

from registry.models.documents import BuildState, DocumentBuild
from registry.services.workers import Liveness, new_worker_id, recover_orphaned_tasks, worker_alive


def _dead_worker_id() -> str:
    """The id a worker that has exited would have had (a finished process's id, on this host)."""
    proc = subprocess.Popen(["true"])
    proc.wait()
    host = new_worker_id().split(":")[0]
    return f"{host}:{proc.pid}:gone{proc.pid}"


def _running_task(workers: list[str]) -> DBTaskResult:
    return DBTaskResult.objects.create(
        status="RUNNING",
        args_kwargs={"args": [1], "kwargs": {}},
        task_path="registry.tasks.build_document",
        backend_name="default",
        run_after=timezone.now() - dt.timedelta(minutes=1),
        started_at=timezone.now(),
        worker_ids=workers,
    )


@pytest.fixture
def build(mark, technician):
    return DocumentBuild.objects.create(kind="sheet", mark=mark, requested_by=technician, state=BuildState.RUNNING)


@pytest.mark.django_db
def test_a_dead_workers_task_is_queued_again(build):
    task = _running_task([_dead_worker_id()])
    DocumentBuild.objects.filter(pk=build.pk).update(task_id=str(task.pk))
    done = recover_orphaned_tasks()
    assert (done.requeued, done.failed) == (1, 0)
    task.refresh_from_db()
    build.refresh_from_db()
    assert task.status == "READY" and task.started_at is None
    assert build.state == BuildState.QUEUED and "again" in build.step
    # The queue hands it to the next worker.
    assert DBTaskResult.objects.ready().filter(pk=task.pk).exists()


@pytest.mark.django_db
def test_after_the_last_attempt_the_task_fails_with_the_reason(build, settings):
    settings.REGISTRY = {**settings.REGISTRY, "TASK_MAX_ATTEMPTS": 3}
    task = _running_task([_dead_worker_id() + "a", _dead_worker_id() + "b", _dead_worker_id()])
    DocumentBuild.objects.filter(pk=build.pk).update(task_id=str(task.pk))
    done = recover_orphaned_tasks()
    assert (done.requeued, done.failed) == (0, 1)
    task.refresh_from_db()
    build.refresh_from_db()
    assert task.status == "FAILED" and task.finished_at is not None
    assert build.state == BuildState.FAILED and "interrupted 3 times" in build.error
    assert "nothing was saved" in build.error


@pytest.mark.django_db
def test_a_living_workers_task_is_left_alone(build):
    me = new_worker_id()
    assert me.split(":")[1] == str(os.getpid())
    with Liveness(me):
        assert worker_alive(me) is True
        task = _running_task([me])
        assert recover_orphaned_tasks().requeued == 0
        task.refresh_from_db()
        assert task.status == "RUNNING"
    assert worker_alive(_dead_worker_id()) is False
