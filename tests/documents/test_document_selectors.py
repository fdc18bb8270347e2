"""Document reads (``registry.selectors.documents``): what the mark page, the documents page and the API list."""

from __future__ import annotations

import pytest

from registry.models import DocumentState
from registry.selectors import documents as doc_reads
from registry.services.documents import document_build_sheet, documents_mark_changed

pytestmark = pytest.mark.django_db


def test_mark_sheets_newest_first_and_capped(mark, technician, signed_sheet):
    # signed revision 1, then a new draft (revision 2) beside it
    draft = document_build_sheet(actor=technician, mark_code=mark.code)
    sheets = doc_reads.mark_sheets(mark)
    assert [d.revision for d in sheets] == [draft.revision, signed_sheet.revision]
    assert [d.state for d in sheets] == [DocumentState.DRAFT, DocumentState.SIGNED]
    assert doc_reads.mark_sheets(mark, limit=1) == [draft]


def test_document_lists_and_filters(mark, technician, signed_sheet):
    draft = document_build_sheet(actor=technician, mark_code=mark.code)
    lists = doc_reads.document_lists()
    assert lists.open_docs == [draft] and lists.recent == [signed_sheet] and lists.to_reissue == []
    assert list(doc_reads.documents_filtered(state="signed")) == [signed_sheet]
    assert list(doc_reads.documents_filtered(out_of_date=True)) == []
    assert list(doc_reads.documents_filtered()) == [draft, signed_sheet]  # newest first
    documents_mark_changed(mark, "the description changed")
    assert doc_reads.document_lists().to_reissue == [signed_sheet]
    assert list(doc_reads.documents_filtered(out_of_date=True)) == [signed_sheet]
    assert list(doc_reads.documents_filtered(out_of_date=False)) == [draft]
    assert [d.revision for d in doc_reads.document_revisions(signed_sheet)] == [2, 1]
    assert doc_reads.build_by_id(999_999) is None
