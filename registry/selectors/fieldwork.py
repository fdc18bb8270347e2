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
