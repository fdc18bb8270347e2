"""The mark page's reads: the mark with its positions, heights, occupations, visits, files and history.

A fixed number of queries whatever the number of rows (``select_related``; no query per row).
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass

from django.db.models import Case, IntegerField, Value, When

from registry.models import (
    Attachment,
    AttachmentKind,
    HeightRecord,
    Mark,
    MovementCheck,
    Occupation,
    Position,
    PositionState,
    Visit,
)
from registry.selectors.mark_history import HistoryEntry, mark_history
from registry.selectors.positions import network_accuracy
from registry.services.usability import Usability, assess

# Order of positions on the mark page: the current published one first.
POSITION_STATE_ORDER = (
    PositionState.PUBLISHED,
    PositionState.PROPOSED,
    PositionState.SUPERSEDED,
    PositionState.REJECTED,
    PositionState.WITHDRAWN,
)


@dataclass
class MarkDetail:
    """Everything the mark page shows, read in a fixed number of queries."""

    mark: Mark
    positions: list[Position]
    heights: list[HeightRecord]
    occupations: list[Occupation]
    visits: list[Visit]
    photos: list[Attachment]
    files: list[Attachment]
    history: list[HistoryEntry]
    history_truncated: bool
    usability: Usability | None = None

    @property
    def current_positions(self) -> list[Position]:
        return [p for p in self.positions if p.state == PositionState.PUBLISHED]


def mark_detail(*, mark: Mark) -> MarkDetail:
    """The mark page's data for ``mark``, reached through the gatekeeper
    (:func:`registry.services.access.access_mark_by_code`)."""
    rank = Case(
        *[When(state=s, then=Value(i)) for i, s in enumerate(POSITION_STATE_ORDER)],
        default=Value(len(POSITION_STATE_ORDER)),
        output_field=IntegerField(),
    )
    positions = list(
        Position.objects.filter(mark=mark)
        .select_related("created_by", "decided_by", "superseded_by")
        .annotate(state_rank=rank)
        .order_by("state_rank", "-epoch_yr", "-created_at", "-pk")
    )
    for p in positions:  # the figure the API gives, computed in one place
        p.network_accuracy = network_accuracy(p)
    heights = list(
        HeightRecord.objects.filter(mark=mark).select_related("created_by").order_by("-current", "-created_at", "-pk")
    )
    occupations = list(
        Occupation.objects.filter(mark=mark)
        .select_related("result_position", "created_by")
        .order_by("-start_utc", "-pk")
    )
    visits = list(
        Visit.objects.filter(mark=mark).select_related("created_by").order_by("-visited_on", "-created_at", "-pk")
    )
    attachments = list(
        Attachment.objects.filter(mark=mark).select_related("uploaded_by").order_by("-uploaded_at", "-pk")
    )

    by_occupation: dict[int, list[Attachment]] = defaultdict(list)
    by_visit: dict[int, list[Attachment]] = defaultdict(list)
    for a in attachments:
        if a.occupation_id:
            by_occupation[a.occupation_id].append(a)
        if a.visit_id:
            by_visit[a.visit_id].append(a)
    # Each occupation's result compared with the published position: the newest stored movement check.
    checks: dict[int, MovementCheck] = {}
    result_ids = [o.result_position_id for o in occupations if o.result_position_id]
    for c in (
        MovementCheck.objects.filter(position_id__in=result_ids)
        .select_related("compared_with")
        .order_by("position_id", "-created_at", "-id")
    ):
        checks.setdefault(c.position_id, c)
    for o in occupations:
        o.attachment_list = by_occupation.get(o.pk, [])
        o.movement_check = checks.get(o.result_position_id)
    for v in visits:
        v.attachment_list = by_visit.get(v.pk, [])

    history, truncated = mark_history(mark=mark)
    return MarkDetail(
        mark=mark,
        positions=positions,
        heights=heights,
        occupations=occupations,
        visits=visits,
        photos=[a for a in attachments if a.kind == AttachmentKind.PHOTO],
        files=[a for a in attachments if a.kind != AttachmentKind.PHOTO],
        history=history,
        history_truncated=truncated,
        usability=assess(mark.status, visits[0].finding if visits else None, suspect_reason=mark.suspect_reason),
    )


def visit_of_mark(*, mark: Mark, pk: int) -> Visit | None:
    """The visit ``pk`` of ``mark`` (None when it is not one of the mark's visits)."""
    return Visit.objects.filter(mark=mark, pk=pk).first()


def position_of_mark(*, mark: Mark, pk: int) -> Position | None:
    """The position ``pk`` of ``mark`` (None when it is not one of the mark's positions)."""
    return Position.objects.filter(mark=mark, pk=pk).first()
