"""Is this PDF an authentic, current document of the registry? (public page, API and ``verify_document``).

One function decides, for every caller: :func:`verify_pdf`. Its answer, in order:

1. The file carries a PDF signature that pyHanko validates: the signed bytes are intact, the
   signature is correct, it covers the whole file, and the signer's chain ends in an authority the
   registry trusts (its own, or one an administrator accepted with an imported certificate). Otherwise:
   **not authentic** (``altered``, ``no_signature``, ``unknown_signer``).
2. The registry issued exactly this file: its SHA-256 equals a signed or superseded document's, signed
   with the certificate recorded for it. Otherwise: **not authentic** (``not_issued``,
   ``signer_mismatch``).
3. Authentic. It is **current** unless it is ``superseded`` by a newer revision, ``out_of_date`` (its
   mark changed after signing), or its certificate was ``certificate_revoked`` after signing.

Nothing here reveals more than the document shows: the public summary names the document's kind,
subject code, revision, issue date and signatory (name, licence, jurisdiction) and its standing.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import re
from dataclasses import dataclass, field
from typing import Any

from django.utils import timezone

from registry.errors import NotFound
from registry.models import CertificateAuthority, Document, DocumentState, SignatoryProfile

#: Exit codes of ``verify_document``.
EXIT_CURRENT, EXIT_NOT_AUTHENTIC, EXIT_NOT_CURRENT = 0, 1, 3

_CODE_IN_PDF = re.compile(rb"Document ([SR]-[0-9A-Z]{4}-[0-9A-Z]{4}), revision (\d+)")

REASON_TEXT = {
    "no_signature": "The file carries no electronic signature.",
    "unreadable": "The file is not a PDF that can be read.",
    "altered": "The file was changed after it was signed: its signature no longer matches its content.",
    "unknown_signer": "The signature was not made with a certificate issued by an authority this registry trusts.",
    "not_issued": "The signature is intact, but this registry has no record of issuing this file.",
    "signer_mismatch": "The file was signed with a different certificate from the one the registry recorded.",
    "revoked_before_signing": "The certificate had been revoked before the file was signed.",
    "superseded": "A newer revision of this document has been issued.",
    "out_of_date": (
        "The mark's published position, status or description has changed since this document was signed; "
        "ask the office for a current one."
    ),
    "certificate_revoked": "The signatory's certificate has been revoked since this document was signed.",
}


@dataclass
class Verification:
    authentic: bool
    intact: bool
    document: Document | None = None
    claimed_code: str = ""
    reasons: list[str] = field(default_factory=list)

    @property
    def current(self) -> bool:
        return self.authentic and not self.reasons

    @property
    def exit_code(self) -> int:
        if not self.authentic:
            return EXIT_NOT_AUTHENTIC
        return EXIT_CURRENT if self.current else EXIT_NOT_CURRENT

    @property
    def verdict(self) -> str:
        if not self.authentic:
            return "not authentic"
        return "authentic and current" if self.current else "authentic, but not current"

    def messages(self) -> list[str]:
        out = []
        for r in self.reasons:
            text = REASON_TEXT.get(r, r)
            d = self.document
            if r == "superseded" and d is not None:
                newer = newest_revision(d)
                if newer is not None:
                    text += f" The current one is revision {newer.revision} (document {newer.code})."
            if r == "certificate_revoked" and d is not None and d.certificate and d.certificate.revoked_at:
                text = (
                    f"The signatory's certificate was revoked on {d.certificate.revoked_at:%Y-%m-%d}, after this "
                    "document was signed."
                )
            out.append(text)
        return out

    def as_json(self) -> dict[str, Any]:
        d = self.document if self.authentic else None
        newer = newest_revision(d) if d is not None and d.state == DocumentState.SUPERSEDED else None
        return {
            "authentic": self.authentic,
            "intact": self.intact,
            "document_code": d.code if d else (self.claimed_code or None),
            "revision": d.revision if d else None,
            "signed_by": signer_words(d) if d else None,
            "signed_at": d.signed_at.isoformat() if d and d.signed_at else None,
            "current": self.current,
            "superseded_by": newer.code if newer else None,
            "reasons": [{"code": r, "message": m} for r, m in zip(self.reasons, self.messages(), strict=True)],
        }


def signer_words(doc: Document) -> str:
    """ "Priya Vantongeren, licence DEMO-0412 (Corvid State Board of Licensure, DEMO)"."""
    user = doc.signed_by
    if user is None:
        return ""
    name = user.get_full_name() or user.username
    profile = SignatoryProfile.objects.filter(user=user).first()
    return f"{name}, licence {profile.licence_number} ({profile.jurisdiction})" if profile else name


def newest_revision(doc: Document) -> Document | None:
    """The subject's current signed revision (for a superseded document)."""
    qs = Document.objects.filter(state=DocumentState.SIGNED)
    qs = qs.filter(mark_id=doc.mark_id) if doc.mark_id else qs.filter(job_id=doc.job_id)
    return qs.exclude(pk=doc.pk).order_by("-revision").first()


def trust_roots() -> list[str]:
    return list(CertificateAuthority.objects.values_list("certificate_pem", flat=True))


def _standing(doc: Document) -> list[str]:
    reasons = []
    if doc.state == DocumentState.SUPERSEDED:
        reasons.append("superseded")
    if doc.out_of_date:
        reasons.append("out_of_date")
    cert = doc.certificate
    if cert is not None and cert.revoked_at is not None:
        reasons.append("certificate_revoked")
    return reasons


def verify_pdf(data: bytes) -> Verification:
    """Decide whether ``data`` is an authentic document of this registry, and whether it is current."""
    from cryptography import x509

    from registry.reports.ca import certificate_fingerprint
    from registry.reports.signing import check_signature

    match = _CODE_IN_PDF.search(data) if data else None
    claimed = match.group(1).decode("ascii") if match else ""
    digest = hashlib.sha256(data).hexdigest()
    doc = (
        Document.objects.select_related("certificate", "signed_by", "mark", "job")
        .filter(sha256=digest, state__in=(DocumentState.SIGNED, DocumentState.SUPERSEDED))
        .first()
    )
    check = check_signature(data, trust_root_pems=trust_roots(), at=doc.signed_at if doc else None)
    if not check.found:
        reason = "unreadable" if check.problem.startswith("not a readable") else "no_signature"
        return Verification(False, False, claimed_code=claimed, reasons=[reason])
    intact = check.intact and check.valid and check.covers_whole_file
    if not intact:
        return Verification(False, False, claimed_code=claimed, reasons=["altered"])
    if not check.trusted:
        return Verification(False, True, claimed_code=claimed, reasons=["unknown_signer"])
    if doc is None:
        return Verification(False, True, claimed_code=claimed, reasons=["not_issued"])
    signer = x509.load_der_x509_certificate(check.signer_certificate_der)
    if doc.certificate is None or certificate_fingerprint(signer) != doc.certificate.fingerprint_sha256:
        return Verification(False, True, claimed_code=claimed, reasons=["signer_mismatch"])
    cert = doc.certificate
    if cert.revoked_at is not None and doc.signed_at is not None and cert.revoked_at <= doc.signed_at:
        return Verification(False, True, document=doc, claimed_code=doc.code, reasons=["revoked_before_signing"])
    return Verification(True, True, document=doc, claimed_code=doc.code, reasons=_standing(doc))


# ---------------------------------------------------------------------------------------------------
# The public summary of a document (by its code; no file needed)
# ---------------------------------------------------------------------------------------------------


@dataclass
class PublicSummary:
    document: Document
    kind: str
    subject: str
    revision: int
    issued_on: dt.date
    signed_by: str
    signed_at: dt.datetime
    reasons: list[str]
    newer: Document | None

    @property
    def current(self) -> bool:
        return not self.reasons

    def messages(self) -> list[str]:
        return Verification(True, True, document=self.document, reasons=self.reasons).messages()


def public_summary(code: Any) -> PublicSummary:
    """What anyone may know about an issued document from its code (raises NotFound for anything else)."""
    code = str(code or "").strip().upper()
    not_found = NotFound("No issued document has this code.", details={"code": code})
    if not code or len(code) > 20:
        raise not_found
    doc = (
        Document.objects.select_related("certificate", "signed_by", "mark", "job")
        .filter(code=code, state__in=(DocumentState.SIGNED, DocumentState.SUPERSEDED))
        .first()
    )
    if doc is None:
        raise not_found
    reasons = _standing(doc)
    return PublicSummary(
        document=doc,
        kind=doc.get_kind_display(),
        subject=(f"mark {doc.mark.code}" if doc.mark_id else f"job {doc.job.code}"),
        revision=doc.revision,
        issued_on=timezone.localtime(doc.created_at, dt.UTC).date(),
        signed_by=signer_words(doc),
        signed_at=doc.signed_at,
        reasons=reasons,
        newer=newest_revision(doc) if doc.state == DocumentState.SUPERSEDED else None,
    )
