"""Background workers on several processes and machines: who is alive, and what happens to a dead one's task.

Workers (``manage.py task_worker``, a wrapper of django-tasks-db's ``db_worker``) take tasks from the
database queue. A worker that is killed in the middle of a task (power cut, out of memory, SIGKILL) leaves
the task marked *running* for ever; this module finds such tasks and puts them right:

* **Who is alive.** On PostgreSQL each worker holds a session advisory lock named after its id, on a
  connection of its own, for as long as the process lives; the server drops it the moment the process or
  its machine goes away. A task whose worker's lock can be taken has lost its worker. On SQLite (one
  machine) the worker id carries the host name and process id, and a process that no longer exists has
  lost its task.
* **What then.** The task is queued again, up to ``REGISTRY_TASK_MAX_ATTEMPTS`` runs in all (default 3),
  then marked failed, with the reason in words on its document build, if it has one. Tasks themselves do
  their writes in one transaction (a document build writes its document in one short transaction at the
  end), so a killed run leaves nothing half-done, and a rerun starts clean.

:func:`recover_orphaned_tasks` runs when a worker starts and every ``REGISTRY_TASK_RECOVER_SECONDS``
(default 30) in each worker; ``manage.py task_worker --recover-only`` runs it once.
"""

from __future__ import annotations

import hashlib
import logging
import os
import socket
from dataclasses import dataclass
from typing import TYPE_CHECKING

from django.conf import settings
from django.db import connections, transaction
from django.utils import timezone

if TYPE_CHECKING:
    import psycopg

log = logging.getLogger(__name__)

#: First key of the two-key advisory locks the workers hold (an arbitrary constant of this project).
LOCK_CLASS = 0x52_47_57  # "RGW"


def _setting(name: str, default: int) -> int:
    return int(getattr(settings, "REGISTRY", {}).get(name, default))


def new_worker_id() -> str:
    """``host:pid:random`` (at most 64 characters, as django-tasks-db requires)."""
    from django.utils.crypto import get_random_string

    host = socket.gethostname().split(".")[0][:30]
    return f"{host}:{os.getpid()}:{get_random_string(8)}"


def lock_key(worker_id: str) -> int:
    """Second key of a worker's advisory lock: a signed 32-bit number from its id."""
    return int.from_bytes(hashlib.sha256(worker_id.encode()).digest()[:4], "big", signed=True)


class Liveness:
    """Held by a living worker: a PostgreSQL connection of its own holding the worker's advisory lock."""

    def __init__(self, worker_id: str, using: str = "default") -> None:
        self.worker_id = worker_id
        self.using = using
        self.conn: psycopg.Connection | None = None

    def __enter__(self) -> Liveness:
        conn = connections[self.using]
        if conn.vendor == "postgresql":
            import psycopg

            params = conn.get_connection_params()
            params.pop("cursor_factory", None)
            params.pop("context", None)
            params.pop("server_side_binding", None)
            self.conn = psycopg.connect(**params, autocommit=True)
            self.conn.execute("SELECT pg_advisory_lock(%s, %s)", (LOCK_CLASS, lock_key(self.worker_id)))
        return self

    def __exit__(self, *exc) -> None:
        if self.conn is not None:
            self.conn.close()
            self.conn = None


def worker_alive(worker_id: str, using: str = "default") -> bool | None:
    """True alive, False gone, None cannot tell (another machine, on SQLite)."""
    conn = connections[using]
    if conn.vendor == "postgresql":
        with conn.cursor() as cur:
            cur.execute("SELECT pg_try_advisory_lock(%s, %s)", [LOCK_CLASS, lock_key(worker_id)])
            got = cur.fetchone()[0]
            if got:
                cur.execute("SELECT pg_advisory_unlock(%s, %s)", [LOCK_CLASS, lock_key(worker_id)])
        return not got
    host, _, rest = worker_id.partition(":")
    pid_text = rest.partition(":")[0]
    if host != socket.gethostname().split(".")[0][:30] or not pid_text.isdigit():
        return None
    try:
        os.kill(int(pid_text), 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


@dataclass
class Recovery:
    requeued: int = 0
    failed: int = 0


def recover_orphaned_tasks(using: str = "default") -> Recovery:
    """Queue again (or fail, after the last attempt) every running task whose worker is gone."""
    from django_tasks_db.models import DBTaskResult

    from registry.models.documents import BuildState, DocumentBuild

    max_attempts = max(1, _setting("TASK_MAX_ATTEMPTS", 3))
    result = Recovery()
    running = DBTaskResult.objects.using(using).filter(status="RUNNING").only("id", "worker_ids")
    for candidate in list(running):
        worker = (candidate.worker_ids or [None])[-1]
        if not worker or worker_alive(worker, using) is not False:
            continue
        with transaction.atomic(using=using):
            task = (
                DBTaskResult.objects.using(using)
                .select_for_update(skip_locked=True)
                .filter(pk=candidate.pk, status="RUNNING")
                .first()
            )
            if task is None or (task.worker_ids or [None])[-1] != worker:
                continue  # taken care of meanwhile
            runs = len(task.worker_ids or [])
            build = DocumentBuild.objects.using(using).filter(task_id=str(task.pk)).first()
            now = timezone.now()
            if runs < max_attempts:
                task.status = "READY"
                task.started_at = None
                task.save(update_fields=["status", "started_at"])
                if build is not None and build.state in (BuildState.QUEUED, BuildState.RUNNING):
                    DocumentBuild.objects.using(using).filter(pk=build.pk).update(
                        state=BuildState.QUEUED,
                        step="waiting for a worker again (the one that had it stopped)",
                        progress=0.0,
                    )
                result.requeued += 1
                log.warning(
                    "Task %s lost its worker %s; queued again (run %d of %d).", task.pk, worker, runs, max_attempts
                )
            else:
                reason = (
                    f"The work was interrupted {runs} times (the worker doing it stopped each time); "
                    "nothing was saved. Start it again, and tell the administrator if it keeps happening."
                )
                task.status = "FAILED"
                task.finished_at = now
                task.exception_class_path = "registry.services.workers.WorkerLost"
                task.traceback = reason
                task.save(update_fields=["status", "finished_at", "exception_class_path", "traceback"])
                if build is not None and build.state in (BuildState.QUEUED, BuildState.RUNNING):
                    DocumentBuild.objects.using(using).filter(pk=build.pk).update(
                        state=BuildState.FAILED, error=reason, step="failed", finished_at=now
                    )
                result.failed += 1
                log.warning("Task %s lost its worker %s on its last run; marked failed.", task.pk, worker)
    return result
