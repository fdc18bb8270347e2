"""Background tasks, through Django's tasks interface (the ``django-tasks`` backport on Django 5.2).

Only the interface is used here (``@task``, ``.enqueue``): the backend is a setting (``TASKS``,
``REGISTRY_TASK_BACKEND``), the ORM queue of ``django-tasks-db`` by default, worked by
``python manage.py db_worker``. Progress and errors are kept on our own rows (``DocumentBuild``), which
every backend can update and every page can read.
"""

from __future__ import annotations

from django_tasks import task


@task()
def build_document(build_id: int) -> int | None:
    """Build the document a ``DocumentBuild`` asks for; returns the new document's id."""
    from registry.services.documents import run_build

    return run_build(build_id)


@task()
def run_mark_import(run_id: int) -> str:
    """Run a queued marks import (``MarkImportRun``); returns its final state."""
    from registry.services.import_runs import import_run_execute

    return import_run_execute(run_id)
