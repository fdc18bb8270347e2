"""Reads for base screening: the candidate marks around a site and the records the rules need.

One query per kind of record, whatever the number of marks (no query per mark): the marks
through the nearby-search selector (:func:`registry.selectors.nearby.marks_near`), then their
visits and published positions for all of them at once.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from typing import Any

from django.db.models import Max, Q

from registry.models import Finding, HeightMethod, HeightRecord, Mark, Position, PositionState, Visit


@dataclass
class MarkRecords:
    """What the registry holds about one candidate mark, as of the screening date.

    ``published``: its positions published as of the date (:func:`published_as_of`), newest
    coordinate epoch first (ties: newest id).
    ``last_visit_finding``: the finding of its latest visit on or before the date (None: no visit).
    ``last_intact_on``: the day of its latest ``intact`` visit on or before the date (None: none).
    ``status``: its status at the end of the date (:func:`status_as_of`; its current one for today).
    ``height``: its current orthometric height record to deliver (:func:`preferred_heights`), when asked for.
    """

    mark: Mark
    last_visit_finding: str | None
    last_intact_on: dt.date | None
    published: list[Position] = field(default_factory=list)
    status: str = ""
    height: HeightRecord | None = None

    def __post_init__(self) -> None:
        self.status = self.status or self.mark.status


def _end_of(day: dt.date) -> dt.datetime:
    return dt.datetime.combine(day + dt.timedelta(days=1), dt.time.min, tzinfo=dt.UTC)


def _field_day(at: dt.datetime, new_status: str, after: dict) -> dt.date:
    """The day a status change says it took effect: the field date it names (a mark made suspect carries the
    day of the visit or check that made it so, ``suspect_since``), else the day it was recorded (UTC)."""
    since = after.get("suspect_since") if new_status == "suspect" else None
    if isinstance(since, str):
        try:
            return dt.date.fromisoformat(since[:10])
        except ValueError:
            pass
    return at.astimezone(dt.UTC).date()


def _status_change(object_type: str, action: str, before: Any, after: Any) -> tuple[str, str] | None:
    """(status before, status after) of an audit row that changed a mark's status, else None.

    A mark's own rows carry ``status`` (made suspect, suspicion lifted, retired, recorded destroyed, put back
    into use); publishing a position that lifts a suspicion records it on the position's row as ``mark_status``.
    """
    if not isinstance(before, dict) or not isinstance(after, dict):
        return None
    key = "status" if object_type == Mark._meta.model_name else "mark_status" if action == "position_publish" else ""
    old, new = before.get(key), after.get(key)
    if not isinstance(old, str) or not isinstance(new, str) or old == new:
        return None
    return old, new


def status_as_of(marks, as_of: dt.date) -> dict[int, str]:
    """Each mark's status at the end of ``as_of`` (UTC), from the audit trail.

    Every status change is audited with the status before and after (:func:`_status_change`). Taken in the
    order they were recorded, each takes effect on its field date where it names one (a suspicion from a
    visit dated before it was recorded), never before the change recorded ahead of it, otherwise on the day
    it was recorded. The status at the date is the one the last change in effect by then left; before the
    first change, the status that change started from; with no change at all, today's. Refused attempts
    (actions ending in ``_refused``) changed nothing and are skipped.
    """
    from registry.models import AuditEvent

    current = {m.pk: m.status for m in marks}
    if not current or as_of >= dt.datetime.now(dt.UTC).date():
        return current
    rows = (
        AuditEvent.objects.filter(
            Q(object_type=Mark._meta.model_name, before__has_key="status")
            | Q(action="position_publish", after__has_key="mark_status"),
            mark_id__in=list(current),
        )
        .exclude(action__endswith="_refused")
        .order_by("at", "pk")
        .values_list("mark_id", "object_type", "action", "at", "before", "after")
    )
    changes: dict[int, list[tuple[dt.date, str, str]]] = {}
    for mark_id, object_type, action, at, before, after in rows:
        change = _status_change(object_type, action, before, after)
        if change is None:
            continue
        found = changes.setdefault(mark_id, [])
        day = _field_day(at, change[1], after)
        if found:
            day = max(day, found[-1][0])  # a backdated change does not overtake one recorded before it
        found.append((day, *change))
    status = dict(current)
    for pk, found in changes.items():
        in_effect = [c for c in found if c[0] <= as_of]
        status[pk] = in_effect[-1][2] if in_effect else found[0][1]
    return status


def published_as_of(mark_ids, as_of: dt.date):
    """The positions of ``mark_ids`` that were published at the end of ``as_of`` (UTC).

    Published on or before that day (``decided_at``; a published position without a recorded
    decision time counts as always published) and not yet superseded then. A position withdrawn
    since is left out whatever the date (its publication time is no longer recorded): the
    registry does not screen with coordinates it has taken back.
    """
    end = _end_of(as_of)
    published_then = Q(decided_at__isnull=True) | Q(decided_at__lt=end)
    still = Q(state=PositionState.PUBLISHED) | Q(
        state=PositionState.SUPERSEDED, superseded_at__isnull=False, superseded_at__gte=end
    )
    return Position.objects.filter(published_then & still, mark_id__in=mark_ids)


def screening_records(
    *, lat_deg: float, lon_deg: float, radius_m: float, as_of: dt.date, limit: int, with_heights: bool = False
) -> list[MarkRecords]:
    """The marks within ``radius_m`` of (``lat_deg``, ``lon_deg``), nearest first, with their records."""
    from registry.selectors.nearby import marks_near

    found = marks_near(lat_deg=lat_deg, lon_deg=lon_deg, radius_m=radius_m, limit=limit, as_of=as_of)
    marks = [nm.mark for nm in found]
    ids = [m.pk for m in marks]
    last_visit: dict[int, str] = {}
    for mark_id, finding in (
        Visit.objects.filter(mark_id__in=ids, visited_on__lte=as_of)
        .order_by("mark_id", "-visited_on", "-created_at", "-id")
        .values_list("mark_id", "finding")
    ):
        last_visit.setdefault(mark_id, finding)
    last_good = dict(
        Visit.objects.filter(mark_id__in=ids, finding=Finding.INTACT, visited_on__lte=as_of)
        .values("mark_id")
        .annotate(last=Max("visited_on"))
        .values_list("mark_id", "last")
    )
    positions: dict[int, list[Position]] = {}
    for p in published_as_of(ids, as_of).order_by("mark_id", "-epoch_yr", "-id"):
        positions.setdefault(p.mark_id, []).append(p)
    status = status_as_of(marks, as_of)
    heights = preferred_heights(ids) if with_heights else {}
    return [
        MarkRecords(
            mark=m,
            last_visit_finding=last_visit.get(m.pk),
            last_intact_on=last_good.get(m.pk),
            published=positions.get(m.pk, []),
            status=status[m.pk],
            height=heights.get(m.pk),
        )
        for m in marks
    ]


def preferred_heights(mark_ids) -> dict[int, HeightRecord]:
    """Per mark, its current orthometric height record to deliver: a levelled one before a geoid-derived one
    (a levelled height does not carry the geoid model's error), then the smallest σ, then the newest."""
    best: dict[int, HeightRecord] = {}
    rank = {HeightMethod.LEVELLED: 0, HeightMethod.GEOID: 1}
    for h in HeightRecord.objects.filter(mark_id__in=list(mark_ids), current=True).order_by("-created_at", "-pk"):
        key = (rank.get(h.method, 2), h.sigma_m)
        have = best.get(h.mark_id)
        if have is None or key < (rank.get(have.method, 2), have.sigma_m):
            best[h.mark_id] = h
    return best
