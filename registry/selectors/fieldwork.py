"""Reads of fieldwork (visits, occupations, attachments) for the pages and the API; latest visits.

(The movement check shown before publishing lives in ``registry.services.movement``, so that the page,
the API, commands and imports all run the same one.)
"""

from __future__ import annotations

from typing import Any

from django.db.models import QuerySet

from registry.models import Attachment, Mark, Occupation, Visit

#: How each kind of fieldwork row is listed (newest first) and what its display reads with it.
_ROWS: dict[type, tuple[tuple[str, ...], tuple[str, ...], tuple[str, ...]]] = {
    Visit: (("-visited_on", "-created_at", "-pk"), ("mark", "created_by"), ("attachments",)),
    Occupation: (("-start_utc", "-pk"), ("mark", "created_by"), ("attachments",)),
    Attachment: (("-uploaded_at", "-pk"), ("mark", "uploaded_by"), ()),
}


def _rows(model: Any) -> QuerySet:
    _order, related, prefetch = _ROWS[model]
    return model.objects.select_related(*related).prefetch_related(*prefetch)


def mark_fieldwork(model: type, *, mark: Mark) -> QuerySet:
    """The mark's visits, occupations or attachments (``model``), newest first, in a fixed number of queries."""
    return _rows(model).filter(mark=mark).order_by(*_ROWS[model][0])


def fieldwork_row(model: type, *, pk: int):
    """One visit, occupation or attachment (just written or reached through its mark) with what its display reads."""
    return _rows(model).get(pk=pk)


def latest_visits(*, mark_ids: list[int]) -> dict[int, Visit]:
    """The latest visit of each mark (by date, then recording time), in one query."""
    latest: dict[int, Visit] = {}
    if not mark_ids:
        return latest
    for visit in Visit.objects.filter(mark_id__in=mark_ids).order_by("mark_id", "-visited_on", "-created_at", "-pk"):
        latest.setdefault(visit.mark_id, visit)
    return latest


def latest_findings(*, mark_ids: list[int]) -> dict[int, str]:
    """The finding of each mark's latest visit (by date, then recording time), marks never visited left out.

    The same order as :func:`latest_visits` and ``services.usability.mark_usability``; values only, in
    chunks (SQLite limits the number of parameters), for searches over many marks.
    """
    out: dict[int, str] = {}
    for start in range(0, len(mark_ids), 500):
        chunk = mark_ids[start : start + 500]
        rows = (
            Visit.objects.filter(mark_id__in=chunk)
            .order_by("mark_id", "-visited_on", "-created_at", "-pk")
            .values_list("mark_id", "finding")
        )
        for mark_id, finding in rows:
            out.setdefault(mark_id, finding)
    return out
