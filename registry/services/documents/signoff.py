"""Sign-off: a draft is checked by another person, then signed (PAdES) by a licensed signatory.

- **check**: a manager or signatory who did not prepare it confirms the draft; the SHA-256 of the
  bytes they saw is recorded.
- **sign**: a signatory with a licence on their profile and a valid, unrevoked certificate, who types
  their password again, signs exactly the checked bytes (``registry.reports.signing``). The previous
  signed revision of the subject becomes ``superseded`` in the same transaction. From then on the row
  is frozen (database triggers, migration ``0011_signed_document_triggers``).
"""

from __future__ import annotations

from django.conf import settings
from django.core.files.base import ContentFile
from django.db import transaction
from django.utils import timezone

from registry.errors import Conflict, PermissionDeniedError
from registry.models import Document, DocumentState, SignatoryProfile
from registry.roles import Ability
from registry.services._input import parse_note
from registry.services.access import require_ability
from registry.services.audit import audit_record
from registry.services.documents.common import access_document_by_code, can_check, sha256_hex


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
