"""The managers' queue: every proposed position and every suspect mark, oldest first, with what to decide on.

Each proposed position comes with the movement check stored when it was proposed (verdict, T, p and
the published position it was compared with), the mark's status and stability, its three most recent
visits and the occupations whose result it is. Suspect marks without a proposal come after their
reason and date. A fixed number of queries whatever the length of the queue.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from django.db.models import Prefetch

from registry.models import CheckStage, Mark, MarkStatus, MovementCheck, Occupation, Position, PositionState, Visit

RECENT_VISITS = 3


@dataclass
class QueueItem:
    mark: Mark
    position: Position | None = None
    check: MovementCheck | None = None
    visits: list[Visit] = field(default_factory=list)
    occupations: list[Occupation] = field(default_factory=list)

    @property
    def since(self):
        return self.position.created_at if self.position else self.mark.suspect_since


def proposals_queue(*, limit: int = 500) -> list[QueueItem]:
    """Proposed positions (oldest first), then suspect marks with no proposed position (longest suspect first)."""
    positions = list(
        Position.objects.filter(state=PositionState.PROPOSED)
        .select_related("mark", "created_by")
        .prefetch_related(
            Prefetch(
                "movement_checks",
                queryset=MovementCheck.objects.filter(stage=CheckStage.PROPOSED).order_by("-created_at", "-id"),
                to_attr="proposed_checks",
            ),
            Prefetch("occupations", queryset=Occupation.objects.order_by("start_utc"), to_attr="source_occupations"),
        )
        .order_by("created_at", "id")[:limit]
    )
    with_proposal = {p.mark_id for p in positions}
    suspects = list(
        Mark.objects.filter(status=MarkStatus.SUSPECT)
        .exclude(pk__in=with_proposal)
        .order_by("suspect_since", "code")[: max(0, limit - len(positions))]
    )
    mark_ids = with_proposal | {m.pk for m in suspects}
    visits: dict[int, list[Visit]] = {}
    for visit in Visit.objects.filter(mark_id__in=mark_ids).order_by("mark_id", "-visited_on", "-created_at"):
        bucket = visits.setdefault(visit.mark_id, [])
        if len(bucket) < RECENT_VISITS:
            bucket.append(visit)
    items = [
        QueueItem(
            mark=p.mark,
            position=p,
            check=p.proposed_checks[0] if p.proposed_checks else None,
            visits=visits.get(p.mark_id, []),
            occupations=list(p.source_occupations),
        )
        for p in positions
    ]
    items += [QueueItem(mark=m, visits=visits.get(m.pk, [])) for m in suspects]
    return items
