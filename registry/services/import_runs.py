"""Marks imports from the page: run at once when small, by a task worker when large, with progress.

:func:`import_run_start` checks the options and the role now (a bad option is refused before
anything is stored), keeps the file on a :class:`~registry.models.MarkImportRun`, and either runs it
in the request (files up to ``REGISTRY_IMPORT_INLINE_BYTES``, default 256 KiB: about 1,500 rows,
well under a second) or queues it for the task worker (``registry.tasks.run_mark_import``, the
same tasks interface as document builds; ``manage.py db_worker`` works the queue). The page follows
a queued run by reloading itself.

:func:`import_run_execute` calls :func:`registry.services.imports.mark_import` (all or nothing, the
same rules as ``manage.py import_marks``) and keeps the outcome on the run: the summary; or the
number of problems, the first :data:`~registry.services.imports.ERRORS_SHOWN` to show, and every one
as compressed CSV to download (a file of 100,000 bad rows must not make a page of 50 MB). The file
itself is dropped when the run ends.
"""

from __future__ import annotations

import csv
import gzip
import hashlib
import io
import logging

from django.conf import settings
from django.core.exceptions import ValidationError
from django.db import transaction
from django.utils import timezone

from registry.errors import NotFound
from registry.models import ImportState, MarkImportRun
from registry.roles import Ability
from registry.services.access import require_ability
from registry.services.imports import ERRORS_SHOWN, ImportRejected, detect_format, mark_import
from registry.web.csv_safe import spreadsheet_safe  # a pure helper: text a spreadsheet would run

logger = logging.getLogger(__name__)

#: Files up to this size are imported in the request (setting ``REGISTRY_IMPORT_INLINE_BYTES``).
DEFAULT_INLINE_BYTES = 256 * 1024
ERROR_COLUMNS = ("where", "mark", "column", "problem", "code")


def inline_limit_bytes() -> int:
    return int(getattr(settings, "REGISTRY_IMPORT_INLINE_BYTES", DEFAULT_INLINE_BYTES))


def import_run_start(
    *,
    actor,
    content: bytes,
    filename: str,
    fmt: str | None = None,
    update: bool = False,
    overwrite: bool = False,
    dry_run: bool = False,
) -> MarkImportRun:
    """Keep the file on a new run and run it now (small file) or queue it (large file).

    Raises ``PermissionDeniedError`` (not a manager) and ``ValidationError`` (``unknown_format``,
    ``overwrite_needs_update``) before anything is stored.
    """
    require_ability(actor, Ability.MANAGE)
    if overwrite and not update:
        raise ValidationError(
            "overwrite applies to rows of existing marks, so it needs update.", code="overwrite_needs_update"
        )
    detect_format(filename, fmt)
    raw = bytes(content)
    run = MarkImportRun.objects.create(
        requested_by=actor if getattr(actor, "is_authenticated", False) else None,
        filename=(filename or "")[:200],
        format=fmt or "",
        options={"update": bool(update), "overwrite": bool(overwrite), "dry_run": bool(dry_run)},
        sha256=hashlib.sha256(raw).hexdigest(),
        size_bytes=len(raw),
        content=raw,
        step="waiting for a worker",
    )
    if len(raw) <= inline_limit_bytes():
        import_run_execute(run.pk)
    else:
        transaction.on_commit(lambda: _enqueue(run.pk))
    run.refresh_from_db()
    return run


def _enqueue(run_id: int) -> None:
    from registry.tasks import run_mark_import

    try:
        result = run_mark_import.enqueue(run_id)
    except Exception as exc:  # the queue itself is unavailable: say so on the run
        logger.exception("could not enqueue import run %s", run_id)
        MarkImportRun.objects.filter(pk=run_id, state=ImportState.QUEUED).update(
            state=ImportState.FAILED,
            message=f"The import could not be queued: {exc}. Nothing was changed.",
            content=b"",
            finished_at=timezone.now(),
        )
        return
    MarkImportRun.objects.filter(pk=run_id, task_id="").update(task_id=str(result.id)[:64])


def _errors_csv_gz(errors) -> bytes:
    out = io.StringIO(newline="")
    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow(ERROR_COLUMNS)
    for e in errors:
        writer.writerow([spreadsheet_safe(v) for v in (e.where, e.mark_code, e.field, e.message, e.code)])
    return gzip.compress(out.getvalue().encode("utf-8"), compresslevel=6)


def import_run_execute(run_id: int) -> str:
    """Run a queued import (the task's body); returns the run's final state.

    Progress is written between the steps, outside the import's own transaction (which is all or
    nothing: while it writes, the page says so). A run that is not queued is left alone, so a task
    delivered twice imports once.
    """
    claimed = MarkImportRun.objects.filter(pk=run_id, state=ImportState.QUEUED).update(
        state=ImportState.RUNNING, started_at=timezone.now(), step="starting", progress=0.0
    )
    if not claimed:
        return MarkImportRun.objects.filter(pk=run_id).values_list("state", flat=True).first() or "missing"
    run = MarkImportRun.objects.select_related("requested_by").get(pk=run_id)

    def progress(step: str, fraction: float) -> None:
        if transaction.get_connection().in_atomic_block:
            return  # inside the import's transaction nobody else would see it
        MarkImportRun.objects.filter(pk=run_id).update(step=step[:200], progress=min(max(fraction, 0.0), 1.0))

    outcome: dict = {"content": b"", "finished_at": None, "progress": 1.0}
    try:
        summary = mark_import(
            actor=run.requested_by,
            content=bytes(run.content),
            filename=run.filename,
            fmt=run.format or None,
            update=run.options.get("update", False),
            overwrite=run.options.get("overwrite", False),
            dry_run=run.options.get("dry_run", False),
            progress=progress,
        )
        outcome |= {"state": ImportState.DONE, "summary": summary.as_dict(), "step": "done"}
    except ImportRejected as exc:
        outcome |= {
            "state": ImportState.REFUSED,
            "message": exc.message,
            "error_count": len(exc.errors),
            "errors_shown": [e.as_dict() for e in exc.errors[:ERRORS_SHOWN]],
            "errors_csv_gz": _errors_csv_gz(exc.errors),
            "step": "refused",
        }
    except ValidationError as exc:
        outcome |= {"state": ImportState.REFUSED, "message": " ".join(exc.messages), "step": "refused"}
    except Exception as exc:  # noqa: BLE001 - the run says it failed; the log keeps the trace
        logger.exception("import run %s failed", run_id)
        outcome |= {
            "state": ImportState.FAILED,
            "message": f"The import stopped on an unexpected error ({type(exc).__name__}). Nothing was changed.",
            "step": "failed",
        }
    outcome["finished_at"] = timezone.now()
    MarkImportRun.objects.filter(pk=run_id).update(**outcome)
    return outcome["state"]


def access_import_run(actor, run_id: int) -> MarkImportRun:
    """A run for a manager (the same answer for 'no such run' and 'not allowed': NotFound)."""
    require_ability(actor, Ability.MANAGE)
    run = MarkImportRun.objects.filter(pk=run_id).defer("content").first()
    if run is None:
        raise NotFound(f"No import {run_id}.")
    return run


def import_run_errors_csv(run: MarkImportRun) -> bytes:
    """Every problem of a refused run as CSV text (UTF-8)."""
    data = bytes(run.errors_csv_gz or b"")
    return gzip.decompress(data) if data else (",".join(ERROR_COLUMNS) + "\r\n").encode()
