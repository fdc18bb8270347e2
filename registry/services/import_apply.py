"""The marks import, one mark at a time through the services: existing marks (``update``) and new marks
whose status needs a step after their positions (destroyed, suspect), or every mark with ``batch=False``.

See ``registry.services.imports`` for the rules (versions, supersession, suspicion).
"""

from __future__ import annotations

import datetime as dt
from typing import Any

from django.utils import timezone

from registry.errors import Conflict
from registry.io.common import POSITION_MODEL_FIELDS, MarkRecord
from registry.models import Mark, MarkStatus, Position, PositionState
from registry.services.import_checks import last_mark_change
from registry.services.import_report import ImportSummary
from registry.services.marks import mark_create, mark_set_status, mark_update
from registry.services.positions import position_propose_and_publish
from registry.services.suspect import mark_make_suspect


def _publish(actor, code: str, position: dict[str, Any], summary: ImportSummary) -> None:
    position_propose_and_publish(actor=actor, mark_code=code, data=dict(position), note="published by import")
    summary.positions_published += 1


def _same_position(stored: Position | None, wanted: dict[str, Any]) -> bool:
    if stored is None:
        return False
    return all(getattr(stored, name) == wanted.get(name) for name in POSITION_MODEL_FIELDS)


def nothing_to_apply(group: list[MarkRecord], mark: Mark | None, published: dict[tuple[int, int], Position]) -> bool:
    """Whether the rows of an existing mark (locked and read in this transaction) change nothing.

    True when the row's version is the stored one (or absent), its fields and status are the stored
    ones, neither the file nor the registry says suspect (those rows go through the suspicion rules),
    and every position is the published one of its frame: :func:`apply_mark` would then change
    nothing, so the import counts the mark unchanged without a statement.
    """
    if mark is None:
        return False
    first = group[0]
    if first.version is not None and first.version != mark.version:
        return False
    data = first.mark
    status = data.get("status")
    if MarkStatus.SUSPECT in (status, mark.status) or data.get("suspect_since") or data.get("suspect_reason"):
        return False
    if status is not None and status != mark.status:
        return False
    for name, value in data.items():
        if name not in ("code", "status") and getattr(mark, name) != value:
            return False
    return all(
        record.position is None
        or (
            record.frame_epsg is not None
            and _same_position(published.get((mark.pk, record.frame_epsg)), record.position)
        )
        for record in group
    )


def apply_mark(
    actor,
    group: list[MarkRecord],
    mark: Mark | None,
    note: str,
    summary: ImportSummary,
    at: list,
    *,
    locked: Mark | None = None,
    published: dict[tuple[int, int], Position] | None = None,
):
    """Apply the rows of one mark code; ``at[0]`` is the row being applied (for error reports).

    ``locked``: the mark's row, already locked and read in this transaction; ``published``: the
    published positions of the existing marks by (mark id, frame), read after the lock.
    Returns True when anything changed.
    """
    first = at[0] = group[0]
    data = dict(first.mark)
    suspect_since = data.pop("suspect_since", None)
    suspect_reason = data.pop("suspect_reason", None)
    status = data.get("status")
    any_position = any(r.position is not None for r in group)
    # A destroyed mark takes no new positions: publish first, record the destruction last.
    late_destroyed = status == MarkStatus.DESTROYED
    # A suspect mark becomes suspect through its own service, after the positions (publishing clears it).
    late_suspect = status == MarkStatus.SUSPECT
    changed = False
    was_suspect = False
    if mark is None:
        if late_destroyed and any_position:
            data["status"] = MarkStatus.ACTIVE
        else:
            late_destroyed = False
        if late_suspect:
            data["status"] = MarkStatus.ACTIVE
        mark = mark_create(actor=actor, data=data)
        changed = True
    else:
        # The check before the transaction read the versions; lock the mark and read them again.
        mark = locked if locked is not None else Mark.objects.select_for_update().get(pk=mark.pk)
        if first.version is not None and first.version != mark.version:
            raise Conflict(
                f"mark {mark.code} was changed while the file was being imported: file version {first.version}, "
                f"registry version {mark.version}, last changed {last_mark_change(mark)}",
                code="stale_row",
            )
        expected = first.version if first.version is not None else mark.version
        changes = {k: v for k, v in data.items() if k not in ("code", "status") and getattr(mark, k) != v}
        if changes:
            mark = mark_update(actor=actor, code=mark.code, expected_version=expected, changes=changes)
            expected, changed = mark.version, True
        # A suspect mark made active by the file: after its positions (a new one ends the suspicion).
        late_active = mark.status == MarkStatus.SUSPECT and status == MarkStatus.ACTIVE
        was_suspect = mark.status == MarkStatus.SUSPECT
        if status is not None and status != mark.status and not (late_destroyed or late_suspect or late_active):
            mark = mark_set_status(actor=actor, code=mark.code, status=status, expected_version=expected, note=note)
            changed = True
    for record in group:
        at[0] = record
        if record.position is None:
            continue
        if published is not None:  # read once for the file (each frame appears once per mark)
            stored = published.get((mark.pk, record.position["frame_epsg"]))
        else:
            stored = Position.objects.filter(
                mark=mark, frame_epsg=record.position["frame_epsg"], state=PositionState.PUBLISHED
            ).first()
        if not _same_position(stored, record.position):
            _publish(actor, mark.code, record.position, summary)
            changed = True
    at[0] = first
    if late_destroyed:
        mark.refresh_from_db()
        if mark.status != MarkStatus.DESTROYED:
            mark_set_status(
                actor=actor, code=mark.code, status=MarkStatus.DESTROYED, expected_version=mark.version, note=note
            )
            changed = True
    if not (late_suspect or (status == MarkStatus.ACTIVE and was_suspect)):
        return changed
    mark = Mark.objects.select_for_update().get(pk=mark.pk)
    if late_suspect:
        changed = _apply_suspect(actor, mark, suspect_since, suspect_reason, note) or changed
    elif status == MarkStatus.ACTIVE and mark.status == MarkStatus.SUSPECT:
        # still suspect after the file's positions: the status action refuses (suspect_needs_clearance)
        mark_set_status(actor=actor, code=mark.code, status=status, expected_version=mark.version, note=note)
    return changed


def _apply_suspect(actor, mark: Mark, since: dt.date | None, reason: str | None, note: str) -> bool:
    """The file says the mark is suspect: make it so (``services.suspect``), or check that it already is."""
    if mark.status == MarkStatus.SUSPECT:
        differ = [
            name
            for name, given, stored in (
                ("suspect_since", since, mark.suspect_since),
                ("suspect_reason", reason, mark.suspect_reason),
            )
            if given is not None and given != stored
        ]
        if differ:
            raise Conflict(
                f"mark {mark.code} is suspect since {mark.suspect_since} ({mark.suspect_reason}); the file gives "
                f"another {' and '.join(differ)}, which an import does not change",
                code="suspect_fields_differ",
            )
        return False
    if mark.status != MarkStatus.ACTIVE:
        raise Conflict(
            f"mark {mark.code} is {mark.status}; only an active mark can become suspect", code="suspect_not_applied"
        )
    return mark_make_suspect(
        mark=mark,
        reason=reason or "marked suspect in an imported file",
        since=since or timezone.now().date(),
        actor=actor,
        note=note,
    )
