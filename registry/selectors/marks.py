"""Reads of marks for the pages: list/search, status counts, the mark page, change history.

Every function issues a fixed number of queries, whatever the number of rows
(``select_related`` / ``prefetch_related`` / correlated subqueries; no query per row).
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field
from typing import Any

from django.db.models import (
    Case,
    Count,
    IntegerField,
    Max,
    Min,
    OuterRef,
    Q,
    QuerySet,
    Subquery,
    Value,
    When,
)
from django.db.models.functions import Coalesce

from registry.models import (
    Attachment,
    AttachmentKind,
    AuditEvent,
    HeightRecord,
    Mark,
    MarkStatus,
    MonumentKind,
    MovementCheck,
    Occupation,
    Position,
    PositionState,
    Visit,
)
from registry.selectors.paging import Count as RowCount
from registry.selectors.paging import _planner_estimate, count_rows
from registry.services.usability import Usability, assess

MATCH_PREFIX = "prefix"
MATCH_CONTAINS = "contains"

# Order of positions on the mark page: the current published one first.
POSITION_STATE_ORDER = (
    PositionState.PUBLISHED,
    PositionState.PROPOSED,
    PositionState.SUPERSEDED,
    PositionState.REJECTED,
    PositionState.WITHDRAWN,
)

HISTORY_LIMIT = 200


def _count_subquery(queryset: QuerySet) -> Subquery:
    """``COUNT(*)`` of a correlated queryset, as an integer subquery."""
    counted = queryset.order_by().values("mark").annotate(n=Count("pk")).values("n")
    return Coalesce(Subquery(counted, output_field=IntegerField()), Value(0))


def _search_position(column: str) -> Subquery:
    """A column of the published position the mark's search location was taken from.

    The services copy latitude/longitude of the published position into
    ``search_lat_deg``/``search_lon_deg``; the source is the published position with
    exactly those values (the latest decided one if several frames share them).
    """
    qs = Position.objects.filter(
        mark=OuterRef("pk"),
        state=PositionState.PUBLISHED,
        lat_deg=OuterRef("search_lat_deg"),
        lon_deg=OuterRef("search_lon_deg"),
    ).order_by("-decided_at", "-pk")
    return Subquery(qs.values(column)[:1])


def mark_search(*, q: str = "", match: str = MATCH_PREFIX, text: str = "", status: str = "") -> QuerySet[Mark]:
    """Marks matching the list page's filters, annotated for the list, ordered by code.

    Parameters
    ----------
    q
        Matches the code or the name, case-insensitively: from the start (``match="prefix"``)
        or anywhere (``match="contains"``).
    match
        ``"prefix"`` (default) or ``"contains"``.
    text
        Free text: every word must occur (anywhere, case-insensitive) in the code, name,
        marking, keeper, how the monument is set, or the words of its monument kind.
    status
        A :class:`~registry.models.MarkStatus` value, or empty for all.

    Returns
    -------
    QuerySet[Mark]
        Annotated with ``src_frame_epsg``/``src_epoch_yr`` (the published position the
        search location comes from), ``n_positions``, ``n_published``, ``n_proposed``, ``last_visit_on`` and
        ``last_visit_finding``.
    """
    qs = mark_filter(q=q, match=match, text=text)
    if status:
        qs = qs.filter(status=status)
    last_visit = Visit.objects.filter(mark=OuterRef("pk")).order_by("-visited_on", "-created_at", "-pk")
    return qs.annotate(
        src_frame_epsg=_search_position("frame_epsg"),
        src_epoch_yr=_search_position("epoch_yr"),
        n_positions=_count_subquery(Position.objects.filter(mark=OuterRef("pk"))),
        n_published=_count_subquery(Position.objects.filter(mark=OuterRef("pk"), state=PositionState.PUBLISHED)),
        n_proposed=_count_subquery(Position.objects.filter(mark=OuterRef("pk"), state=PositionState.PROPOSED)),
        last_visit_on=Subquery(last_visit.values("visited_on")[:1]),
        last_visit_finding=Subquery(last_visit.values("finding")[:1]),
    ).order_by("code")


def mark_filter(*, q: str = "", match: str = MATCH_PREFIX, text: str = "") -> QuerySet[Mark]:
    """Marks matching the code/name search and the free text (no status filter, no annotations)."""
    qs = Mark.objects.all()
    q = (q or "").strip()
    if q:
        if match == MATCH_CONTAINS:
            qs = qs.filter(Q(code__icontains=q) | Q(name__icontains=q))
        else:
            # Codes are capital letters, digits and _.- (CODE_VALIDATOR): "starts with, any case" is a
            # case-sensitive prefix of the upper-cased query, which an index serves as a range.
            qs = qs.filter(Q(code__startswith=q.upper()) | Q(name__istartswith=q))
    for word in (text or "").split():
        # the monument's kind is matched by its words ("disk" finds "disk set in rock outcrop")
        kinds = [value for value, label in MonumentKind.choices if word.lower() in str(label).lower()]
        qs = qs.filter(
            Q(code__icontains=word)
            | Q(name__icontains=word)
            | Q(marking__icontains=word)
            | Q(keeper__icontains=word)
            | Q(monument_detail__icontains=word)
            | Q(monument__in=kinds)
        )
    return qs


def attach_usability(rows) -> list:
    """The rows of :func:`mark_search` as a list, each with ``usability`` (status and latest visit)."""
    rows = list(rows)
    for m in rows:
        m.usability = assess(m.status, getattr(m, "last_visit_finding", None), suspect_reason=m.suspect_reason)
    return rows


def mark_status_counts(*, q: str = "", match: str = MATCH_PREFIX, text: str = "") -> dict[str, int]:
    """How many marks of each status match the search (one query); every status present, zeros included."""
    rows = mark_filter(q=q, match=match, text=text).order_by().values("status").annotate(n=Count("pk"))
    counts = {value: 0 for value in MarkStatus.values}
    for row in rows:
        counts[row["status"]] = row["n"]
    return counts


@dataclass
class MarkListCounts:
    """The mark list's counts: exact up to ``registry.selectors.paging.COUNT_CAP``, estimated above it."""

    matching: RowCount  # matching the search and the status filter
    matching_any_status: RowCount  # matching the search, any status
    by_status: dict[str, RowCount]
    registry_total: RowCount

    @property
    def status_counts(self) -> dict[str, int]:
        return {status: c.n for status, c in self.by_status.items()}


def mark_list_counts(*, q: str = "", match: str = MATCH_PREFIX, text: str = "", status: str = "") -> MarkListCounts:
    """Counts for the mark list in a few cheap queries, whatever the registry's size.

    Up to 10,000 matching marks every count is exact; above that (PostgreSQL) the counts are the
    planner's estimates and say so (``exact=False``); SQLite counts exactly.
    """
    searched = bool((q or "").strip() or (text or "").strip())
    base = mark_filter(q=q, match=match, text=text)
    registry_total = count_rows(Mark.objects.all(), unfiltered_model=Mark)
    any_status = registry_total if not searched else count_rows(base)
    if any_status.exact:
        by_status = {value: RowCount(n) for value, n in mark_status_counts(q=q, match=match, text=text).items()}
    else:  # PostgreSQL, more than COUNT_CAP matches: the planner's estimate per status
        by_status = {
            value: RowCount(_planner_estimate(base.filter(status=value)), exact=False) for value in MarkStatus.values
        }
    matching = by_status.get(status, any_status) if status else any_status
    return MarkListCounts(
        matching=matching, matching_any_status=any_status, by_status=by_status, registry_total=registry_total
    )


# Snapshot keys that say nothing a reader of the history needs (the row's own bookkeeping).
_BOOKKEEPING_KEYS = frozenset(
    {
        "id",
        "mark",
        "mark_id",
        "created_at",
        "created_by",
        "created_by_id",
        "updated_at",
        "uploaded_at",
        "uploaded_by",
        "uploaded_by_id",
        "file",  # the stored file's internal name; the original name is shown
    }
)


#: Kinds of audited things, in words (the history names a position by frame, epoch and source instead).
_OBJECT_WORDS = {
    "visit": "a visit",
    "occupation": "an occupation",
    "attachment": "a file",
    "heightrecord": "a height record",
    "document": "a document",
    "job": "a job",
}


@dataclass
class HistoryEntry:
    """One audit event with its per-field changes ready to print.

    ``is_record`` is true for events that recorded something new (no ``before``): their
    ``changes`` list only the non-empty values recorded.
    """

    event: AuditEvent
    changes: list[tuple[str, Any, Any]] = field(default_factory=list)
    is_record: bool = False
    #: in words for the page: what happened, to what (a position by frame, epoch and source)
    what: str = ""
    subject: str = ""


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


def audit_changes(before: dict | None, after: dict | None) -> list[tuple[str, Any, Any]]:
    """Field-by-field (name, before, after) for the keys whose values differ.

    >>> audit_changes({"name": "A", "version": 1}, {"name": "B", "version": 2})
    [('name', 'A', 'B'), ('version', 1, 2)]
    >>> audit_changes(None, {"status": "active"})
    [('status', None, 'active')]
    """
    before = before if isinstance(before, dict) else {}
    after = after if isinstance(after, dict) else {}
    keys = list(dict.fromkeys([*before.keys(), *after.keys()]))
    return [(k, before.get(k), after.get(k)) for k in keys if before.get(k) != after.get(k)]


def mark_history(*, mark: Mark, limit: int = HISTORY_LIMIT) -> tuple[list[HistoryEntry], bool]:
    """The mark's audit events, newest first, at most ``limit``; and whether more exist."""
    events = list(AuditEvent.objects.filter(mark=mark).select_related("actor").order_by("-at", "-pk")[: limit + 1])
    truncated = len(events) > limit
    from registry.web.wording import POSITION_KEYS, USER_KEYS, action_words, describe_position, field_words, value_words

    events = events[:limit]
    # what the events point at, read once: positions (by frame, epoch, source) and people (by name)
    position_ids: set[int] = set()
    user_ids: set[int] = set()
    visit_ids: set[int] = set()
    occupation_ids: set[int] = set()
    for e in events:
        if e.object_type == "position" and str(e.object_id).isdigit():
            position_ids.add(int(e.object_id))
        for snap in (e.before, e.after):
            if isinstance(snap, dict):
                for key in POSITION_KEYS:
                    if isinstance(snap.get(key), int):
                        position_ids.add(snap[key])
                for key in USER_KEYS:
                    if isinstance(snap.get(key), int):
                        user_ids.add(snap[key])
                if isinstance(snap.get("visit_id"), int):
                    visit_ids.add(snap["visit_id"])
                if isinstance(snap.get("occupation_id"), int):
                    occupation_ids.add(snap["occupation_id"])
    positions = {p.pk: p for p in Position.objects.filter(pk__in=position_ids)} if position_ids else {}
    users = {}
    if user_ids:
        from django.contrib.auth import get_user_model

        for u in get_user_model().objects.filter(pk__in=user_ids):
            users[u.pk] = u.get_full_name() or u.username

    others: dict[tuple[str, int], str] = {}
    if visit_ids:
        for v in Visit.objects.filter(pk__in=visit_ids):
            others[("visit_id", v.pk)] = f"the visit of {v.visited_on:%Y-%m-%d} ({v.get_finding_display()})"
    if occupation_ids:
        for o in Occupation.objects.filter(pk__in=occupation_ids):
            others[("occupation_id", o.pk)] = f"the {o.get_method_display()} session of {o.start_utc:%Y-%m-%d}"

    entries = []
    for e in events:
        is_record = e.before is None and isinstance(e.after, dict)
        changes = [
            (
                field_words(name, e.object_type or "mark"),
                value_words(name, before, positions=positions, users=users, others=others),
                value_words(name, after, positions=positions, users=users, others=others),
            )
            for name, before, after in audit_changes(e.before, e.after)
            if name not in _BOOKKEEPING_KEYS and not (is_record and after in (None, ""))
        ]
        if e.object_type == "position":
            p = positions.get(int(e.object_id)) if str(e.object_id).isdigit() else None
            subject = f"Position in {describe_position(p)}" if p is not None else "A position no longer on record"
        elif e.object_type == "mark":
            subject = ""
        else:
            subject = _OBJECT_WORDS.get(e.object_type, (e.object_type or "").replace("_", " ")).capitalize()
        entries.append(
            HistoryEntry(event=e, changes=changes, is_record=is_record, what=action_words(e.action), subject=subject)
        )
    return entries, truncated


def mark_detail(*, code: str) -> MarkDetail:
    """The mark page's data for ``code`` (exact). Raises ``Mark.DoesNotExist``."""
    mark = Mark.objects.get(code=code)
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


def marks_extent() -> tuple[float, float, float, float] | None:
    """South, west, north, east (degrees) of the marks' search locations, or None without any (one query).

    For a map's first view where nothing else places it (the job form's drawing map). Marks across the
    antimeridian give a box around the globe's other side: the view is a starting point only.
    """
    box = Mark.objects.filter(search_lat_deg__isnull=False, search_lon_deg__isnull=False).aggregate(
        s=Min("search_lat_deg"), w=Min("search_lon_deg"), n=Max("search_lat_deg"), e=Max("search_lon_deg")
    )
    if box["s"] is None:
        return None
    return box["s"], box["w"], box["n"], box["e"]
