"""Reads for the fieldwork pages: latest visits.

(The movement check shown before publishing lives in ``registry.services.movement``, so that the page,
the API, commands and imports all run the same one.)
"""

from __future__ import annotations

from registry.models import Visit


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
