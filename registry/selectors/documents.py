"""Reads of documents and their builds, for the pages and the API (views only call these).

Access checks stay where they are decided (``registry.services.documents.access_document_by_code`` for
one document by its code; the views' ability decorators for lists): these functions only read.
"""

from __future__ import annotations

from dataclasses import dataclass

from django.db.models import QuerySet

from registry.models import BuildState, Document, DocumentBuild, DocumentState, Mark, SignatoryProfile

#: States of a document still being prepared (not yet issued).
OPEN_STATES = (DocumentState.DRAFT, DocumentState.CHECKED)
#: Sheets listed on a mark's page: its issued and its open ones, newest revision first.
MARK_PAGE_SHEETS = 3
#: Rows of each list on the documents page.
LIST_LIMIT = 200
RECENT_LIMIT = 50
BUILDS_LIMIT = 20

_RELATED = ("mark", "job", "created_by", "checked_by", "signed_by")


def mark_sheets(mark: Mark, *, limit: int = MARK_PAGE_SHEETS) -> list[Document]:
    """The mark's signed and open sheets, newest revision first (the mark page's documents area)."""
    states = (DocumentState.SIGNED, DocumentState.DRAFT, DocumentState.CHECKED)
    return list(
        Document.objects.filter(mark=mark, state__in=states)
        .only("code", "revision", "state", "out_of_date", "mark_id")  # not the PDF itself
        .order_by("-revision")[:limit]
    )


@dataclass
class DocumentLists:
    to_reissue: list[Document]  # signed, marked out of date, oldest first
    open_docs: list[Document]  # drafts and checked, newest first
    recent: list[Document]  # signed or superseded, most recently signed first
    builds: list[DocumentBuild]  # queued, running or failed report builds, newest first


def document_lists() -> DocumentLists:
    """What the documents page lists."""
    base = Document.objects.select_related(*_RELATED)
    return DocumentLists(
        to_reissue=list(
            base.filter(state=DocumentState.SIGNED, out_of_date=True).order_by("out_of_date_at")[:LIST_LIMIT]
        ),
        open_docs=list(base.filter(state__in=OPEN_STATES).order_by("-created_at")[:LIST_LIMIT]),
        recent=list(
            base.filter(state__in=(DocumentState.SIGNED, DocumentState.SUPERSEDED)).order_by("-signed_at")[
                :RECENT_LIMIT
            ]
        ),
        builds=list(
            DocumentBuild.objects.select_related("job", "requested_by", "document")
            .filter(state__in=(BuildState.QUEUED, BuildState.RUNNING, BuildState.FAILED))
            .order_by("-requested_at")[:BUILDS_LIMIT]
        ),
    )


def document_revisions(doc: Document) -> QuerySet[Document]:
    """Every revision of the same mark's sheet or the same job's report, newest first."""
    same = {"mark_id": doc.mark_id} if doc.mark_id else {"job_id": doc.job_id}
    return Document.objects.filter(**same).select_related("signed_by").order_by("-revision", "-created_at")


def has_licence(user) -> bool:
    """Whether ``user`` has a signatory profile (licence number and jurisdiction) on record."""
    return SignatoryProfile.objects.filter(user=user).exists()


def build_by_id(build_id: int) -> DocumentBuild | None:
    """One report build with its job, document and requester, or None."""
    return DocumentBuild.objects.select_related("job", "document", "requested_by").filter(pk=build_id).first()


def documents_filtered(*, state: str | None = None, out_of_date: bool | None = None) -> QuerySet[Document]:
    """Documents, newest first, optionally of one ``state`` and/or out of date or not (the API's list)."""
    qs = Document.objects.select_related(*_RELATED)
    if state:
        qs = qs.filter(state=state)
    if out_of_date is not None:
        qs = qs.filter(out_of_date=out_of_date)
    return qs.order_by("-created_at", "-pk")
