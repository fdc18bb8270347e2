"""The marks import's reads before it writes: which codes exist, and the ``update`` concurrency check.

One query per :data:`IN_CHUNK` codes or marks, whatever the number of rows; the messages of a stale row
name who changed the mark or its position last, and when (from the audit trail).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable, Iterator

from django.db.models import Count
from django.utils import timezone

from registry.io.common import EVER_PUBLISHED_STATES, REVISION_FIELD, VERSION_FIELD, MarkRecord, RowError
from registry.models import AuditEvent, Mark, Position, PositionState
from registry.services.marks import VERSIONED_ACTIONS

#: Codes per ``IN (...)`` list (SQLite allows a limited number of parameters per statement).
IN_CHUNK = 900


def _chunks(items: Iterable, size: int = IN_CHUNK) -> Iterator[list]:
    chunk = []
    for item in items:
        chunk.append(item)
        if len(chunk) == size:
            yield chunk
            chunk = []
    if chunk:
        yield chunk


def existing_marks(codes: Iterable[str]) -> dict[str, Mark]:
    """Marks of these codes that are in the registry (one query per :data:`IN_CHUNK` codes)."""
    return {m.code: m for chunk in _chunks(sorted(set(codes))) for m in Mark.objects.filter(code__in=chunk)}


def published_positions(mark_ids: list[int]) -> dict[tuple[int, int], Position]:
    """The published position of each (mark, frame) of these marks."""
    out = {}
    for chunk in _chunks(mark_ids):
        for p in Position.objects.filter(mark_id__in=chunk, state=PositionState.PUBLISHED):
            out[(p.mark_id, p.frame_epsg)] = p
    return out


def lock_marks(mark_ids: list[int]) -> dict[int, Mark]:
    """Lock the rows of these marks for the import's transaction (in id order), and read them again."""
    out = {}
    for chunk in _chunks(sorted(mark_ids)):
        for m in Mark.objects.select_for_update().filter(pk__in=chunk).order_by("pk"):
            out[m.pk] = m
    return out


def _when(moment) -> str:
    return timezone.localtime(moment, dt.UTC).strftime("%Y-%m-%d %H:%M UTC") if moment else "an unknown time"


def last_mark_change(mark: Mark) -> str:
    """ "by X at T" for the latest versioned change of ``mark``, from the audit trail."""
    event = (
        AuditEvent.objects.filter(mark=mark, action__in=("mark_create", *VERSIONED_ACTIONS))
        .select_related("actor")
        .order_by("-at", "-id")
        .first()
    )
    if event is None:
        return f"by an unknown user at {_when(mark.updated_at)}"
    who = event.actor.get_username() if event.actor else "an unknown user"
    return f"by {who} at {_when(event.at)}"


def _last_position_change(mark: Mark, frame_epsg: int | None) -> str:
    latest = (
        Position.objects.filter(mark=mark, frame_epsg=frame_epsg, state__in=EVER_PUBLISHED_STATES)
        .select_related("decided_by")
        .order_by("-decided_at", "-id")
        .first()
    )
    if latest is None:
        return "nothing published there now"
    verb = "withdrawn" if latest.state == PositionState.WITHDRAWN else "published"
    who = latest.decided_by.get_username() if latest.decided_by else "an unknown user"
    return f"last {verb} by {who} at {_when(latest.decided_at)}"


def _moved(in_file: int, in_registry: int) -> str:
    if in_file > in_registry:
        return "does not match this file (the file is ahead of the registry: made from another registry, or edited?)"
    return "was changed since this file was made"


def concurrency_errors(records: list[MarkRecord], existing: dict[str, Mark], overwrite: bool) -> list[RowError]:
    """Stale or unversioned rows of existing marks (the ``--update`` check, before anything is written)."""
    mark_ids = sorted({existing[r.code].pk for r in records if r.code in existing})
    revisions = {}
    published = set()
    for chunk in _chunks(mark_ids):
        revisions.update(
            {
                (row["mark_id"], row["frame_epsg"]): row["n"]
                for row in Position.objects.filter(mark_id__in=chunk, state__in=EVER_PUBLISHED_STATES)
                .values("mark_id", "frame_epsg")
                .annotate(n=Count("id"))
                .order_by()
            }
        )
        published.update(
            Position.objects.filter(mark_id__in=chunk, state=PositionState.PUBLISHED).values_list(
                "mark_id", "frame_epsg"
            )
        )
    errors: list[RowError] = []

    def err(record, code, message, field_name):
        errors.append(RowError(record.where, record.index, code, message, field_name, record.code))

    for record in records:
        mark = existing.get(record.code)
        if mark is None:
            continue
        missing = [VERSION_FIELD] if record.version is None else []
        if record.position is not None and record.position_revision is None:
            missing.append(REVISION_FIELD)
        if missing and not overwrite:
            err(
                record,
                "version_required",
                f"mark {record.code} is in the registry and this row has no {' or '.join(missing)}; export the "
                "registry again and edit that file, or import with overwrite to apply the row whatever was "
                "changed since (the audit trail records it)",
                missing[0],
            )
        if record.version is not None and record.version != mark.version:
            err(
                record,
                "stale_row",
                f"mark {record.code} {_moved(record.version, mark.version)}: file version {record.version}, "
                f"registry version {mark.version}, last changed {last_mark_change(mark)}",
                VERSION_FIELD,
            )
        if record.position is not None and record.position_revision is not None:
            frame = record.frame_epsg
            stored = revisions.get((mark.pk, frame), 0)
            withdrawn = stored and (mark.pk, frame) not in published
            if record.position_revision != stored or (withdrawn and record.position_revision > 0):
                now = f"registry revision {stored}" + (" (withdrawn, none published)" if withdrawn else "")
                err(
                    record,
                    "stale_row",
                    f"the position of {record.code} in EPSG:{frame} {_moved(record.position_revision, stored)}: file revision "
                    f"{record.position_revision}, {now}, {_last_position_change(mark, frame)}",
                    REVISION_FIELD,
                )
    return errors
