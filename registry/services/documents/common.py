"""What the document services share: codes, the verification address, page sizes, who may prepare or
check, finding a document by its code, the next revision, and writing a built document as a draft."""

from __future__ import annotations

import hashlib
import secrets
from typing import Any

from django.conf import settings
from django.core.exceptions import ValidationError
from django.db.models import Max
from django.urls import reverse

from registry.errors import NotFound, PermissionDeniedError
from registry.models import Document, DocumentKind, DocumentMark, DocumentState, Job, Mark, PageSize
from registry.roles import Ability, has_ability
from registry.selectors.documents import OPEN_STATES
from registry.services.audit import audit_record

#: Crockford's base-32 alphabet (no I, L, O, U): codes read aloud and typed without confusion.
_CODE_ALPHABET = "0123456789ABCDEFGHJKMNPQRSTVWXYZ"
_KIND_LETTER: dict[str, str] = {DocumentKind.SHEET: "S", DocumentKind.REPORT: "R"}


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
