"""Writes on documents: prepare (build), check, sign; mark signed documents out of date.

The workflow (brief §2, issue 8):

- **prepare**: a technician, manager or signatory builds a sheet (one mark; in the request, it takes
  tens of milliseconds) or a control report (one job; in the background through Django's tasks
  interface, see :func:`document_request_report` and ``registry.tasks``). The PDF is complete before
  anything is written; the document row, its bytes and its marks are written in one transaction. A
  new build replaces the subject's open (draft or checked) document, which was never issued.
- **check**: a manager or signatory who did not prepare it confirms the draft; the SHA-256 of the
  bytes they saw is recorded.
- **sign**: a signatory with a licence on their profile and a valid, unrevoked certificate, who types
  their password again, signs exactly the checked bytes (PAdES, ``registry.reports.signing``). The
  previous signed revision of the subject becomes ``superseded`` in the same transaction. From then on
  the row is frozen (database triggers, migration ``0011_signed_document_triggers``).
- **out of date**: :func:`documents_mark_changed` is called by the mark and position services inside
  their transactions; the signed documents that print that mark are flagged (never edited) and listed
  for the signatories to reissue.
"""

from __future__ import annotations

import hashlib
import logging
import secrets
from collections.abc import Callable
from typing import Any

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.files.base import ContentFile
from django.db import transaction
from django.db.models import Max
from django.urls import reverse
from django.utils import timezone

from registry.errors import Conflict, NotFound, PermissionDeniedError, RegistryError
from registry.models import (
    BuildState,
    Document,
    DocumentBuild,
    DocumentKind,
    DocumentMark,
    DocumentState,
    Job,
    Mark,
    PageSize,
    SignatoryProfile,
)
from registry.roles import Ability, has_ability
from registry.services._input import parse_note
from registry.services.access import access_job_by_code, access_mark_by_code, require_ability
from registry.services.audit import audit_record

logger = logging.getLogger(__name__)

#: Crockford's base-32 alphabet (no I, L, O, U): codes read aloud and typed without confusion.
_CODE_ALPHABET = "0123456789ABCDEFGHJKMNPQRSTVWXYZ"
_KIND_LETTER: dict[str, str] = {DocumentKind.SHEET: "S", DocumentKind.REPORT: "R"}
OPEN_STATES = (DocumentState.DRAFT, DocumentState.CHECKED)


# ---------------------------------------------------------------------------------------------------
# Small helpers
# ---------------------------------------------------------------------------------------------------


def new_document_code(kind: str) -> str:
    """A fresh public code, e.g. ``S-7K4Q-MX2C``: a kind letter and 40 random bits (not guessable)."""
    body = "".join(secrets.choice(_CODE_ALPHABET) for _ in range(8))
    return f"{_KIND_LETTER[kind]}-{body[:4]}-{body[4:]}"


def normalise_code(code: Any) -> str:
    return str(code or "").strip().upper()


def verify_url(code: str) -> str:
    """The public verification page of a document (what its QR code holds)."""
    return settings.REGISTRY.get("PUBLIC_URL", "").rstrip("/") + reverse("web:verify", args=[code])


def office_page_size(page_size: str | None = None) -> str:
    value = (page_size or settings.REGISTRY.get("PAGE_SIZE") or "A4").strip()
    for choice in PageSize.values:
        if value.lower() == choice.lower():
            return choice
    raise ValidationError(
        {"page_size": ValidationError("The page size is A4 or Letter.", code="invalid_choice", params={"value": value})}
    )


def sha256_hex(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def can_prepare(user) -> bool:
    return any(has_ability(user, a) for a in (Ability.RECORD, Ability.MANAGE, Ability.SIGN))


def can_check(user) -> bool:
    return has_ability(user, Ability.MANAGE) or has_ability(user, Ability.SIGN)


def _require_prepare(actor) -> None:
    if not can_prepare(actor):
        raise PermissionDeniedError(
            "Your role does not allow you to prepare documents (technicians, managers and signatories do).",
            details={"ability": "prepare_documents"},
        )


def access_document_by_code(user, code: Any, *, for_update: bool = False) -> Document:
    """A document by its code, for a signed-in user with the VIEW ability (same 404 otherwise)."""
    code = normalise_code(code)
    not_found = NotFound(f"No document with code {code!r}.", details={"code": code})
    if not has_ability(user, Ability.VIEW) or not code or len(code) > 20:
        raise not_found
    qs = Document.objects.select_related("mark", "job", "created_by", "checked_by", "signed_by", "certificate")
    if for_update:
        qs = qs.select_for_update(of=("self",))
    try:
        return qs.get(code=code)
    except Document.DoesNotExist:
        raise not_found from None


def _next_revision(*, mark: Mark | None = None, job: Job | None = None) -> tuple[int, Document | None]:
    """The revision a new build gets, and the subject's current signed document (which it would supersede)."""
    issued = Document.objects.filter(mark=mark) if mark is not None else Document.objects.filter(job=job)
    top = issued.filter(state__in=("signed", "superseded")).aggregate(m=Max("revision"))["m"] or 0
    current = issued.filter(state=DocumentState.SIGNED).first()
    return top + 1, current


def _discard_open(actor, *, mark: Mark | None = None, job: Job | None = None) -> None:
    qs = Document.objects.filter(state__in=OPEN_STATES)
    qs = qs.filter(mark=mark) if mark is not None else qs.filter(job=job)
    for doc in qs:
        audit_record(
            actor=actor,
            action="document_discard",
            obj=doc,
            before={"code": doc.code, "state": doc.state, "revision": doc.revision},
            note="replaced by a new build before it was signed",
            mark=mark,
        )
        doc.delete()


def _store_document(
    *,
    actor,
    kind: str,
    mark: Mark | None,
    job: Job | None,
    code: str,
    revision: int,
    supersedes: Document | None,
    page_size: str,
    built,
    options: dict,
    covered_mark_ids: list[int],
) -> Document:
    doc = Document.objects.create(
        code=code,
        kind=kind,
        mark=mark,
        job=job,
        revision=revision,
        state=DocumentState.DRAFT,
        page_size=page_size,
        content=built.content,
        size_bytes=len(built.content),
        sha256=sha256_hex(built.content),
        page_count=built.page_count,
        signature_page=built.signature_page,
        signature_box=built.signature_box,
        options=options,
        created_by=actor if getattr(actor, "is_authenticated", False) else None,
        supersedes=supersedes,
    )
    DocumentMark.objects.bulk_create([DocumentMark(document=doc, mark_id=pk) for pk in sorted(set(covered_mark_ids))])
    audit_record(
        actor=actor,
        action="document_prepare",
        obj=doc,
        after={
            "code": doc.code,
            "kind": kind,
            "revision": revision,
            "sha256": doc.sha256,
            "pages": doc.page_count,
            "supersedes": supersedes.code if supersedes else None,
            **{k: v for k, v in options.items() if k != "residuals_csv"},
        },
        mark=mark,
    )
    return doc


# ---------------------------------------------------------------------------------------------------
# Prepare
# ---------------------------------------------------------------------------------------------------


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


# ---------------------------------------------------------------------------------------------------
# Check and sign
# ---------------------------------------------------------------------------------------------------


def document_check(*, actor, code: str, note: str = "") -> Document:
    """Confirm a draft (manager or signatory; not the person who prepared it)."""
    note = parse_note(note, required=False)
    if not can_check(actor):
        raise PermissionDeniedError(
            "Your role does not allow you to check documents (managers and signatories do).",
            details={"ability": "check_documents"},
        )
    with transaction.atomic():
        doc = access_document_by_code(actor, code, for_update=True)
        if doc.state != DocumentState.DRAFT:
            raise Conflict(
                f"Document {doc.code} is {doc.state}; only a draft can be checked.",
                code="invalid_state",
                details={"state": doc.state},
            )
        if doc.created_by_id is not None and doc.created_by_id == actor.pk:
            raise Conflict("You prepared this document; another person must check it.", code="checker_is_preparer")
        doc.state = DocumentState.CHECKED
        doc.checked_by = actor
        doc.checked_at = timezone.now()
        doc.check_note = note
        doc.checked_sha256 = doc.sha256
        doc.save(update_fields=["state", "checked_by", "checked_at", "check_note", "checked_sha256"])
        audit_record(
            actor=actor,
            action="document_check",
            obj=doc,
            before={"state": DocumentState.DRAFT},
            after={"state": DocumentState.CHECKED, "sha256": doc.sha256},
            note=note,
            mark=doc.mark,
        )
    return doc


def document_sign(*, actor, code: str, password: str, now=None) -> Document:
    """Sign a checked document (signatory; password asked again; licence and valid certificate needed)."""
    from registry.reports import ca as ca_lib
    from registry.reports.signing import SigningError, sign_pdf
    from registry.services.certificates import key_secret, usable_certificate

    require_ability(actor, Ability.SIGN)
    if not isinstance(password, str) or not password or not actor.check_password(password):
        raise PermissionDeniedError("The password is not correct; nothing was signed.", code="wrong_password")
    profile = SignatoryProfile.objects.filter(user=actor).first()
    if profile is None:
        raise Conflict(
            "Your profile has no licence number and jurisdiction; an administrator records them first.",
            code="no_licence",
        )
    now = now or timezone.now()
    with transaction.atomic():
        doc = access_document_by_code(actor, code, for_update=True)
        if doc.state != DocumentState.CHECKED:
            raise Conflict(
                f"Document {doc.code} is {doc.state}; only a checked document can be signed.",
                code="invalid_state",
                details={"state": doc.state},
            )
        content = bytes(doc.content)
        if sha256_hex(content) != doc.checked_sha256 or doc.sha256 != doc.checked_sha256:
            raise Conflict(
                "The document changed after it was checked; it cannot be signed.", code="changed_after_check"
            )
        cert = usable_certificate(actor, at=now)
        if cert is None:
            raise Conflict(
                "You have no valid signing certificate (none issued, expired, or revoked); an administrator "
                "issues one (office_ca issue).",
                code="no_certificate",
            )
        try:
            key = ca_lib.decrypt_key(cert.key_pem_encrypted, key_secret())
            signed = sign_pdf(
                content,
                certificate_pem=cert.certificate_pem,
                private_key=key,
                chain_pems=[cert.authority.certificate_pem],
                page=doc.signature_page,
                box=doc.signature_box,
                signer_name=actor.get_full_name() or actor.username,
                licence_number=profile.licence_number,
                jurisdiction=profile.jurisdiction,
                document_code=doc.code,
                revision=doc.revision,
                signed_at=now,
                office=settings.REGISTRY.get("OFFICE_NAME", ""),
            )
        except ca_lib.CaError as exc:
            raise Conflict(str(exc), code=exc.code) from None
        except SigningError as exc:
            raise Conflict(str(exc), code=exc.code) from None
        previous = None
        if doc.supersedes_id:
            previous = Document.objects.select_for_update().filter(pk=doc.supersedes_id, state="signed").first()
        if previous is None:
            previous = (
                Document.objects.select_for_update()
                .filter(state="signed", **({"mark": doc.mark} if doc.mark_id else {"job": doc.job}))
                .exclude(pk=doc.pk)
                .first()
            )
        if previous is not None:
            previous.state = DocumentState.SUPERSEDED
            previous.superseded_at = now
            previous.save(update_fields=["state", "superseded_at"])
            audit_record(
                actor=actor,
                action="document_supersede",
                obj=previous,
                before={"state": DocumentState.SIGNED},
                after={"state": DocumentState.SUPERSEDED, "by": doc.code},
                mark=doc.mark,
            )
        digest = sha256_hex(signed)
        name = f"{doc.code}-r{doc.revision}.pdf"
        doc.pdf.save(name, ContentFile(signed), save=False)
        stored_path = doc.pdf.name
        try:
            doc.content = signed
            doc.size_bytes = len(signed)
            doc.sha256 = digest
            doc.state = DocumentState.SIGNED
            doc.signed_by = actor
            doc.signed_at = now
            doc.certificate = cert
            if previous is not None and doc.supersedes_id is None:
                doc.supersedes = previous
            doc.save()
            audit_record(
                actor=actor,
                action="document_sign",
                obj=doc,
                before={"state": DocumentState.CHECKED, "sha256": doc.checked_sha256},
                after={
                    "state": DocumentState.SIGNED,
                    "sha256": digest,
                    "size_bytes": len(signed),
                    "certificate_serial": cert.serial_hex,
                    "supersedes": previous.code if previous else None,
                },
                mark=doc.mark,
            )
        except Exception:
            doc.pdf.storage.delete(stored_path)  # the row was not written: no orphan file
            raise
    return doc


# ---------------------------------------------------------------------------------------------------
# The hook other services call
# ---------------------------------------------------------------------------------------------------


def documents_mark_changed(mark: Mark | int, reason: str, *, actor=None) -> int:
    """Flag the signed, current documents that print ``mark`` as out of date (never edit them).

    Call it inside the transaction of the change (``mark_update`` for a printed description field,
    ``mark_set_status``, ``position_publish``, ``position_withdraw``). Returns how many were flagged;
    each gets a ``document_out_of_date`` audit row.
    """
    mark_id = mark.pk if isinstance(mark, Mark) else int(mark)
    now = timezone.now()
    ids = DocumentMark.objects.filter(mark_id=mark_id).values("document_id")
    docs = list(Document.objects.select_for_update().filter(pk__in=ids, state=DocumentState.SIGNED, out_of_date=False))
    for doc in docs:
        Document.objects.filter(pk=doc.pk).update(out_of_date=True, out_of_date_at=now, out_of_date_reason=reason[:500])
        audit_record(
            actor=actor,
            action="document_out_of_date",
            obj=doc,
            before={"out_of_date": False},
            after={"out_of_date": True},
            note=reason,
            mark=doc.mark if doc.mark_id else None,
        )
    return len(docs)
