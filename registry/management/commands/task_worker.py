"""``python manage.py task_worker [db_worker options] [--recover-only]``: a background worker that others
can rely on.

The database queue's own worker (django-tasks-db's ``db_worker``, same options) plus what running several
workers on several processes or machines needs (``registry/services/workers.py``): the worker holds a
liveness lock while it lives, and on start and every ``REGISTRY_TASK_RECOVER_SECONDS`` it queues again (or
fails, after ``REGISTRY_TASK_MAX_ATTEMPTS`` runs) the tasks of workers that were killed mid-task.
``--recover-only`` does that once and exits (exit 0; prints what it did).
"""

from __future__ import annotations

import logging
import threading

from django.db import close_old_connections, connections
from django_tasks_db.management.commands.db_worker import Command as DbWorkerCommand

from registry.services.workers import Liveness, new_worker_id, recover_orphaned_tasks

log = logging.getLogger("registry.worker")


def _recover_now() -> None:
    try:
        done = recover_orphaned_tasks()
        if done.requeued or done.failed:
            log.warning("Recovered tasks of stopped workers: %d queued again, %d failed.", done.requeued, done.failed)
    except Exception:  # noqa: BLE001 - the next round tries again; the worker goes on working
        log.exception("Could not check for tasks of stopped workers.")
    finally:
        connections.close_all()


class Command(DbWorkerCommand):
    help = "Run a background worker (database queue) that recovers the tasks of workers that were killed."

    def add_arguments(self, parser):
        super().add_arguments(parser)
        parser.set_defaults(worker_id=None, reload=False)
        parser.add_argument(
            "--recover-only", action="store_true", help="put right the tasks of stopped workers once, then exit"
        )

    def handle(self, *args, **opts):
        from django.conf import settings

        if opts.pop("recover_only"):
            done = recover_orphaned_tasks()
            self.stdout.write(f"Tasks of stopped workers: {done.requeued} queued again, {done.failed} marked failed.")
            return
        opts["worker_id"] = opts.get("worker_id") or new_worker_id()
        every_s = float(getattr(settings, "REGISTRY", {}).get("TASK_RECOVER_SECONDS", 30))
        stop = threading.Event()

        def keep_recovering() -> None:
            while not stop.wait(every_s):
                _recover_now()
                close_old_connections()

        with Liveness(opts["worker_id"]):
            _recover_now()
            thread = threading.Thread(target=keep_recovering, name="task-recovery", daemon=True)
            thread.start()
            try:
                super().handle(*args, **opts)
            finally:
                stop.set()
