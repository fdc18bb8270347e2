"""Out of date: signed documents that print a mark are flagged (never edited) when the mark changes."""

from __future__ import annotations

from django.utils import timezone

from registry.models import Document, DocumentMark, DocumentState, Mark
from registry.services.audit import audit_record


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
