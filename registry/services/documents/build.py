"""Preparing documents: a mark's sheet (in the request), a job's control report (queued for a worker
through Django's tasks interface, or in process for the command line), retrying a failed build.

The PDF is complete before anything is written; the document row, its bytes and its marks are written
in one transaction (``common._store_document``). A new build replaces the subject's open (draft or
checked) document, which was never issued.
"""

from __future__ import annotations

import logging
from collections.abc import Callable
from typing import Any

from django.conf import settings
from django.core.exceptions import ValidationError
from django.db import transaction
from django.utils import timezone

from registry.errors import Conflict, NotFound, RegistryError
from registry.models import BuildState, Document, DocumentBuild, DocumentKind, Job, Mark
from registry.roles import Ability, has_ability
from registry.services.access import access_job_by_code, access_mark_by_code
from registry.services.audit import audit_record
from registry.services.documents.common import (
    _discard_open,
    _next_revision,
    _require_prepare,
    _store_document,
    new_document_code,
    office_page_size,
    verify_url,
)

logger = logging.getLogger("registry.services.documents")


def document_build_sheet(*, actor, mark_code: str, page_size: str | None = None) -> Document:
    """Build the station description sheet of a mark as a new draft revision."""
    from registry.reports.sheet import render_sheet
    from registry.selectors.sheets import sheet_content

    _require_prepare(actor)
    size = office_page_size(page_size)
    mark = access_mark_by_code(actor, mark_code)
    with transaction.atomic():
        mark = Mark.objects.select_for_update().get(pk=mark.pk)  # one build of this mark at a time
        revision, current = _next_revision(mark=mark)
        code = new_document_code(DocumentKind.SHEET)
        content = sheet_content(mark)
        built = render_sheet(
            content,
            code=code,
            revision=revision,
            issued=timezone.now().date(),
            size_name=size,
            office=settings.REGISTRY.get("OFFICE_NAME", ""),
            logo_path=settings.REGISTRY.get("OFFICE_LOGO", ""),
            verify_url=verify_url(code),
        )
        _discard_open(actor, mark=mark)
        return _store_document(
            actor=actor,
            kind=DocumentKind.SHEET,
            mark=mark,
            job=None,
            code=code,
            revision=revision,
            supersedes=current,
            page_size=size,
            built=built,
            options={"withheld": bool(content.withheld)},
            covered_mark_ids=content.covered_mark_ids,
        )


def _report_options(
    *, residuals_csv: str | None, style: str | None, page_size: str | None, appendix: str | None = None
) -> dict:
    from registry.geodesy.accuracy import ComputationInputError
    from registry.geodesy.statements import parse_residuals_csv

    style = (style or settings.REGISTRY.get("REPORT_STATEMENT_STYLE") or "nssda").strip().lower()
    if style not in ("nssda", "asprs2023"):
        raise ValidationError(
            {"style": ValidationError("The statement style is nssda or asprs2023.", code="invalid_choice")}
        )
    appendix = (appendix or "used").strip().lower()
    if appendix not in ("used", "candidates"):
        raise ValidationError(
            {"appendix": ValidationError("The appendix holds the marks used or all candidates.", code="invalid_choice")}
        )
    options: dict[str, Any] = {
        "statement_style": style,
        "page_size": office_page_size(page_size),
        "appendix": appendix,
    }
    if residuals_csv:
        if len(residuals_csv) > 2_000_000:
            raise ValidationError(
                {"residuals": ValidationError("The residual file is larger than 2 MB.", code="too_large")}
            )
        try:
            table = parse_residuals_csv(residuals_csv)
        except ComputationInputError as exc:
            raise ValidationError({"residuals": ValidationError(exc.message, code=exc.code)}) from None
        options["residuals_csv"] = residuals_csv
        options["checkpoints"] = table.n
    return options


def document_request_report(
    *,
    actor,
    job_code: str,
    residuals_csv: str | None = None,
    style: str | None = None,
    page_size: str | None = None,
    appendix: str | None = None,
) -> DocumentBuild:
    """Queue the build of a job's control report; the page follows its progress. Input is checked now."""
    _require_prepare(actor)
    job = access_job_by_code(actor, job_code)
    options = _report_options(residuals_csv=residuals_csv, style=style, page_size=page_size, appendix=appendix)
    with transaction.atomic():
        running = DocumentBuild.objects.filter(job=job, state__in=(BuildState.QUEUED, BuildState.RUNNING)).first()
        if running is not None:
            raise Conflict(
                f"A control report of job {job.code} is already being built (requested {running.requested_at:%H:%M} "
                "UTC); wait for it to finish.",
                code="build_running",
                details={"build": running.pk},
            )
        build = DocumentBuild.objects.create(
            kind=DocumentKind.REPORT,
            job=job,
            options=options,
            requested_by=actor if getattr(actor, "is_authenticated", False) else None,
            step="waiting for a worker",
        )
        audit_record(
            actor=actor,
            action="document_request",
            obj=build,
            after={"job": job.code, **{k: v for k, v in options.items() if k != "residuals_csv"}},
        )
    _enqueue(build)
    return build


def _enqueue(build: DocumentBuild) -> None:
    """Hand the build to the task backend (after the request's own transaction has committed)."""
    from registry.tasks import build_document

    try:
        result = build_document.enqueue(build.pk)
    except Exception as exc:  # the queue itself is unavailable: say so on the build, keep nothing half-done
        logger.exception("could not enqueue build %s", build.pk)
        DocumentBuild.objects.filter(pk=build.pk).update(
            state=BuildState.FAILED, error=f"The build could not be queued: {exc}", finished_at=timezone.now()
        )
        return
    DocumentBuild.objects.filter(pk=build.pk, task_id="").update(task_id=str(result.id)[:64])


def document_retry_build(*, actor, build_id: int) -> DocumentBuild:
    """Start a failed build again (same inputs)."""
    _require_prepare(actor)
    with transaction.atomic():
        build = DocumentBuild.objects.select_for_update().filter(pk=build_id).first()
        if build is None or not has_ability(actor, Ability.VIEW):
            raise NotFound(f"No build {build_id}.")
        if build.state != BuildState.FAILED:
            raise Conflict("Only a failed build can be started again.", code="build_not_failed")
        build.state, build.progress, build.error, build.task_id = BuildState.QUEUED, 0.0, "", ""
        build.step, build.started_at, build.finished_at = "waiting for a worker", None, None
        build.save()
        audit_record(actor=actor, action="document_retry", obj=build, after={"build": build.pk})
    _enqueue(build)
    return build


def run_build(build_id: int, *, on_progress: Callable[[float, str], None] | None = None) -> int | None:
    """Do one build (the task's body; also run inline by ``build_report``). Returns the document's id.

    The PDF is made first, outside any transaction, so that each progress write commits on its own and
    a page polling the build sees it. The document is then written in one short transaction, after
    checking (with the job's row locked) that no other revision of the job was issued meanwhile; a
    failure records its message on the build and leaves no document.
    """
    from registry.reports.control_report import build_report_pdf

    build = DocumentBuild.objects.select_related("job", "requested_by").get(pk=build_id)
    if build.state not in (BuildState.QUEUED, BuildState.RUNNING):
        return build.document_id
    DocumentBuild.objects.filter(pk=build.pk).update(
        state=BuildState.RUNNING, started_at=timezone.now(), attempts=build.attempts + 1, step="starting", progress=0.0
    )
    last = [0.0]

    def progress(fraction: float, step: str) -> None:
        fraction = min(max(float(fraction), 0.0), 1.0)
        if fraction - last[0] >= 0.01 or fraction >= 0.99:
            last[0] = fraction
            DocumentBuild.objects.filter(pk=build.pk).update(progress=fraction, step=step[:200])
        if on_progress is not None:
            on_progress(fraction, step)

    actor = build.requested_by
    try:
        job = build.job
        revision, current = _next_revision(job=job)
        code = new_document_code(DocumentKind.REPORT)
        built, covered = build_report_pdf(
            job=job,
            actor=actor,
            code=code,
            revision=revision,
            options=build.options,
            verify_url=verify_url(code),
            progress=progress,
        )
        progress(0.99, "saving the document")
        with transaction.atomic():
            job = Job.objects.select_for_update().get(pk=build.job_id)
            if _next_revision(job=job) != (revision, current):
                raise Conflict(
                    f"Another revision of job {job.code}'s report was issued while this one was built; start again.",
                    code="revision_changed",
                )
            _discard_open(actor, job=job)
            doc = _store_document(
                actor=actor,
                kind=DocumentKind.REPORT,
                mark=None,
                job=job,
                code=code,
                revision=revision,
                supersedes=current,
                page_size=build.options.get("page_size", "A4"),
                built=built,
                options=dict(build.options),
                covered_mark_ids=covered,
            )
    except Exception as exc:
        message = (
            exc.message
            if isinstance(exc, RegistryError)
            else (" ".join(exc.messages) if isinstance(exc, ValidationError) else f"{type(exc).__name__}: {exc}")
        )
        if not isinstance(exc, RegistryError | ValidationError):
            logger.exception("document build %s failed", build.pk)
        DocumentBuild.objects.filter(pk=build.pk).update(
            state=BuildState.FAILED, error=message[:2000], finished_at=timezone.now(), step="failed"
        )
        raise
    DocumentBuild.objects.filter(pk=build.pk).update(
        state=BuildState.DONE, progress=1.0, step="done", finished_at=timezone.now(), document=doc
    )
    return doc.pk


def document_build_report(
    *,
    actor,
    job_code: str,
    residuals_csv: str | None = None,
    style: str | None = None,
    page_size: str | None = None,
    appendix: str | None = None,
    progress: Callable[[float, str], None] | None = None,
) -> Document:
    """Build a job's control report now, in this process (the command line); same rules as the page."""
    _require_prepare(actor)
    job = access_job_by_code(actor, job_code)
    options = _report_options(residuals_csv=residuals_csv, style=style, page_size=page_size, appendix=appendix)
    build = DocumentBuild.objects.create(
        kind=DocumentKind.REPORT,
        job=job,
        options=options,
        requested_by=actor if getattr(actor, "is_authenticated", False) else None,
        step="building in process",
    )
    try:
        doc_id = run_build(build.pk, on_progress=progress)
    except RegistryError:
        raise
    except ValidationError:
        raise
    except Exception as exc:
        raise Conflict(f"The report could not be built: {exc}", code="build_failed") from exc
    return Document.objects.get(pk=doc_id)
