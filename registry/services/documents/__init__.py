"""Writes on documents: prepare (build), check, sign; mark signed documents out of date.

One package, a module per concept: ``common`` (codes, access, revisions, storing a draft), ``build``
(sheets and reports), ``signoff`` (check and sign), ``out_of_date`` (the hook other services call).
Callers import from ``registry.services.documents``.

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

from registry.selectors.documents import OPEN_STATES
from registry.services.documents.build import (
    document_build_report,
    document_build_sheet,
    document_request_report,
    document_retry_build,
    run_build,
)
from registry.services.documents.common import (
    access_document_by_code,
    can_check,
    can_prepare,
    new_document_code,
    normalise_code,
    office_page_size,
    sha256_hex,
    verify_url,
)
from registry.services.documents.out_of_date import documents_mark_changed
from registry.services.documents.signoff import document_check, document_sign

__all__ = [
    "OPEN_STATES",
    "access_document_by_code",
    "can_check",
    "can_prepare",
    "document_build_report",
    "document_build_sheet",
    "document_check",
    "document_request_report",
    "document_retry_build",
    "document_sign",
    "documents_mark_changed",
    "new_document_code",
    "normalise_code",
    "office_page_size",
    "run_build",
    "sha256_hex",
    "verify_url",
]
