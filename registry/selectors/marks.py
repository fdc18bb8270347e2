"""Reads of marks for the list: search, filters, status counts.

The mark page reads through :mod:`registry.selectors.mark_page`, its change history through
:mod:`registry.selectors.mark_history`.

Every function issues a fixed number of queries, whatever the number of rows
(``select_related`` / ``prefetch_related`` / correlated subqueries; no query per row).
"""

from __future__ import annotations

from dataclasses import dataclass

from django.db import connections, router
from django.db.models import (
    BooleanField,
    Count,
    IntegerField,
    Max,
    Min,
    OuterRef,
    Q,
    QuerySet,
    Subquery,
    Value,
)
from django.db.models.expressions import RawSQL
from django.db.models.functions import Coalesce

from registry.models import (
    Mark,
    MarkStatus,
    MonumentKind,
    Position,
    PositionState,
    Visit,
)
from registry.selectors.paging import COUNT_CAP, _planner_estimate, count_rows
from registry.selectors.paging import Count as RowCount
from registry.services.usability import assess

MATCH_PREFIX = "prefix"
MATCH_CONTAINS = "contains"

#: The free-text columns joined by spaces, upper-cased: the expression of the trigram index of migration
#: 0017 (PostgreSQL), which answers ``LIKE '%WORD%'`` on it. A word (no space in it) occurs in one of
#: the columns exactly when it occurs in this text.
FREE_TEXT_SQL = (
    "UPPER(code::text || ' ' || name::text || ' ' || marking::text || ' ' || keeper::text"
    " || ' ' || monument_detail::text)"
)


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
    connection = connections[router.db_for_read(Mark)]
    for word in (text or "").split():
        # the monument's kind is matched by its words ("disk" finds "disk set in rock outcrop")
        kinds = [value for value, label in MonumentKind.choices if word.lower() in str(label).lower()]
        if connection.vendor == "postgresql":  # one indexed text (FREE_TEXT_SQL), the same answer
            pattern = f"%{connection.ops.prep_for_like_query(word)}%"
            in_text = RawSQL(f"{FREE_TEXT_SQL} LIKE UPPER(%s)", [pattern], output_field=BooleanField())
            qs = qs.filter(Q(in_text) | Q(monument__in=kinds)) if kinds else qs.filter(in_text)
            continue
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
    found: dict[str, int] | None = None  # the count of each status, when exact
    if searched:
        # One pass over at most COUNT_CAP + 1 matches gives the count and the count of each status.
        sql, params = base.order_by().values("status")[: COUNT_CAP + 1].query.sql_with_params()
        with connections[base.db].cursor() as cur:
            cur.execute(f"SELECT capped.status, COUNT(*) FROM ({sql}) capped GROUP BY capped.status", params)
            found = dict(cur.fetchall())
        n = sum(found.values())
        if n <= COUNT_CAP:
            any_status = RowCount(n)
        else:
            found = None
            if connections[base.db].vendor == "postgresql":
                any_status = RowCount(max(_planner_estimate(base), COUNT_CAP + 1), exact=False)
            else:
                any_status = RowCount(base.order_by().count())
    else:
        any_status = registry_total
    if found is not None:
        by_status = {value: RowCount(found.get(value, 0)) for value in MarkStatus.values}
    elif any_status.exact:
        by_status = {value: RowCount(n) for value, n in mark_status_counts(q=q, match=match, text=text).items()}
    else:  # PostgreSQL, more than COUNT_CAP matches: the planner's estimate per status
        by_status = {
            value: RowCount(_planner_estimate(base.filter(status=value)), exact=False) for value in MarkStatus.values
        }
    matching = by_status.get(status, any_status) if status else any_status
    return MarkListCounts(
        matching=matching, matching_any_status=any_status, by_status=by_status, registry_total=registry_total
    )


def mark_api_search(*, q: str = "", status: str = "", code: str = "", name: str = "") -> QuerySet[Mark]:
    """The API's mark list: :func:`mark_search` (``q`` anywhere in the code or name), then an exact
    ``code`` and a ``name`` fragment when given."""
    qs = mark_search(q=q, match=MATCH_CONTAINS, status=status)
    if code:
        qs = qs.filter(code=code)
    if name:
        qs = qs.filter(name__icontains=name)
    return qs


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
