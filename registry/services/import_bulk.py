"""The import's batch path for new marks: the same checks and audit rows as the services, in batches.

``mark_create`` + ``position_propose`` + ``position_publish`` cost about thirty queries per row (a lock,
a constraint check per constraint, an audit row, the search-location refresh...), which made a
4,500-row file take two minutes. For marks that do not exist yet and whose status needs no later
step (active or retired), the import instead

1. validates every mark and position in Python exactly as those services do (the same input
   cleaning, text limits, ``full_clean`` field validation and position checks, with the same
   error codes), without a query per row;
2. inserts the marks, then their positions (already published: nothing published them before,
   so nothing is superseded), in batches of :data:`BATCH` rows;
3. writes the audit rows those services would have written, in the same order and with the same
   contents (``mark_create``; per position ``position_propose`` then ``position_publish``, whose
   ``before``/``after`` carry the search location as each publication moved it), through
   ``AuditEvent.objects.bulk_create``, which chains them under the chain's lock.

The database's own constraints still guard every insert (uniqueness, ranges, one published
position per mark and frame). If one refuses, the caller rolls the batch path back and runs the
same marks through the services one by one, which name the row that was refused.

Marks that exist (``update``) and marks the file makes destroyed or suspect go through the
services as before (their rules: versions, supersession, suspicion, signed documents out of date).
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping
from types import SimpleNamespace
from typing import Any

from django.core.exceptions import ValidationError
from django.db import models
from django.utils import timezone

from registry.io.common import MarkRecord, RowError
from registry.models import AuditEvent, CheckStage, Mark, MarkStatus, MovementCheck, Position, PositionState
from registry.models.audit import chain_new_rows
from registry.services.audit import snapshot
from registry.services.import_report import service_errors
from registry.services.limits import check_text_limits
from registry.services.marks import mark_from_input
from registry.services.movement import movement_compare_many
from registry.services.movement_checks import check_summary, movement_check_values
from registry.services.positions import _parse_position
from registry.services.rows_insert import insert_rows

#: Rows per INSERT.
BATCH = 500
PUBLISH_NOTE = "published by import"


def batch_eligible(group: list[MarkRecord]) -> bool:
    """Whether a new mark's rows can take the batch path: no status step after its positions.

    A new mark's positions are in different frames (``check_rows_per_mark``), so none supersedes another;
    each is compared by the movement check with the one published just before it (the newest published
    position of the mark, ``registry.services.movement.comparison_target``), the first with nothing.
    """
    return group[0].mark.get("status") in (None, "", MarkStatus.ACTIVE, MarkStatus.RETIRED)


#: Field kinds whose ``clean()`` (to_python, choices, null and blank, validators) depends on the value alone.
_VALUE_ONLY = (models.CharField, models.TextField, models.FloatField, models.IntegerField, models.BooleanField)


class _CleanMemo:
    """``full_clean`` for the many new objects of a batch, leaving out what cannot fail or change.

    For the field kinds of :data:`_VALUE_ONLY`, a (field, value) that passed ``clean()`` unchanged once
    passes unchanged again, and a Python float in a float field without validators or choices always
    does: those fields are excluded from the next objects' ``full_clean``. Every other field, and the
    model's own ``clean()``, run as for a single object: the same rules and the same errors.
    """

    def __init__(self) -> None:
        self.passed: set[tuple[str, type, Any]] = set()

    def full_clean(self, obj: models.Model, exclude: tuple[str, ...] = ()) -> None:
        skip = list(exclude)
        checked = []
        for f in obj._meta.concrete_fields:
            if f.name in exclude or f.primary_key or not isinstance(f, _VALUE_ONLY):
                continue
            value = getattr(obj, f.attname)
            if type(value) is float and isinstance(f, models.FloatField) and not f.validators and not f.choices:
                skip.append(f.name)
                continue
            key = (f.name, type(value), value)
            try:
                known = key in self.passed
            except TypeError:  # not hashable: cleaned every time
                continue
            if known:
                skip.append(f.name)
            else:
                checked.append((f, key))
        # Uniqueness was checked for the whole file (one query); the database enforces it and the constraints.
        obj.full_clean(exclude=skip, validate_unique=False, validate_constraints=False)
        for f, key in checked:
            after = getattr(obj, f.attname)
            if type(after) is key[1] and after == key[2]:
                self.passed.add(key)


def _new_mark(group: list[MarkRecord], memo: _CleanMemo) -> Mark:
    """The unsaved mark of a group's first row, validated as ``mark_create`` validates it."""
    data = dict(group[0].mark)
    data.pop("suspect_since", None)
    data.pop("suspect_reason", None)
    mark = mark_from_input(data)
    memo.full_clean(mark)
    return mark


def _new_position(position_data: Mapping[str, Any], actor, memo: _CleanMemo) -> Position:
    """The unsaved position of a row, validated as ``position_propose`` validates it."""
    cleaned = _parse_position(dict(position_data))
    position = Position(created_by=actor, state=PositionState.PROPOSED, **cleaned)
    check_text_limits(position)
    # The actor was checked by require_ability; foreign keys are not looked up once per row.
    memo.full_clean(position, exclude=("mark", "created_by", "decided_by", "superseded_by"))
    return position


def _values(obj) -> dict[str, Any]:
    """The column values of a validated, unsaved model object."""
    return {f.attname: getattr(obj, f.attname) for f in obj._meta.concrete_fields if not f.primary_key}


def _event(
    actor, action: str, obj, mark: Mark, *, before=None, after=None, note: str = "", repr_: str = ""
) -> SimpleNamespace:
    """An audit row as ``services.audit.audit_record`` writes it (chained and inserted by the caller).

    ``before``/``after`` are built here from ``snapshot()`` and ``check_summary()`` values, which are
    JSON-safe already (``json_safe`` would give them back unchanged: the equivalence test compares).
    """
    return SimpleNamespace(
        at=None,
        actor_id=actor.pk if actor is not None else None,
        action=action,
        object_type=obj._meta.model_name,
        object_id=str(obj.pk),
        object_repr=(repr_ or str(obj))[:200],
        mark_id=mark.pk,
        before=before,
        after=after,
        note=note,
        seq=None,
        prev_hash="",
        row_hash="",
    )


def create_marks_in_batches(
    *,
    actor,
    groups: Iterable[tuple[str, list[MarkRecord]]],
    progress: Callable[[int], None] | None = None,
) -> tuple[list[str], int, list[RowError]]:
    """Create new marks and publish their positions in batches; call inside the import's transaction.

    Returns ``(created codes, positions published, row errors)``. With any row error nothing is
    written (the caller refuses the file). ``progress(rows)`` is called as rows are validated.
    """
    audit_actor = actor if getattr(actor, "is_authenticated", False) else None
    planned: list[tuple[Mark, list[tuple[MarkRecord, Position]]]] = []
    errors: list[RowError] = []
    memo = _CleanMemo()
    rows = 0
    for _code, group in groups:
        at = group[0]
        try:
            mark = _new_mark(group, memo)
            positions = []
            for record in group:
                at = record
                if record.position is not None:
                    positions.append((record, _new_position(record.position, actor, memo)))
        except ValidationError as exc:
            errors.extend(service_errors(exc, at))
            continue
        finally:
            rows += len(group)
            if progress is not None and rows % BATCH < len(group):
                progress(rows)
        planned.append((mark, positions))
    if errors:
        return [], 0, errors

    now = timezone.now()
    for mark, positions in planned:
        mark.created_at = mark.updated_at = now
        if positions:  # the latest publication gives the search location (written with the mark)
            last = positions[-1][1]
            mark.search_lat_deg, mark.search_lon_deg = last.lat_deg, last.lon_deg
    marks = [mark for mark, _ in planned]
    for mark, pk in zip(marks, insert_rows(Mark, [_values(mark) for mark in marks]), strict=True):
        mark.pk = pk
    mark_snapshots = {}
    # Positions are inserted proposed-then-published in one step: same row as propose + publish.
    all_positions = []
    for mark, positions in planned:
        # mark_create's snapshot is taken before any position is published: no search location yet
        mark_snapshots[mark.pk] = snapshot(mark) | {"search_lat_deg": None, "search_lon_deg": None}
        for _record, position in positions:
            position.mark = mark
            position.created_at = now
            position.state = PositionState.PUBLISHED
            position.decided_by = audit_actor
            position.decided_at = now
            all_positions.append(position)
    ids = insert_rows(Position, [_values(position) for position in all_positions])
    for position, pk in zip(all_positions, ids, strict=True):
        position.pk = pk
    # The movement checks the position services store on proposing and on publishing. Each position of a new
    # mark is compared with the one published before it (the mark's newest; other frames, as the file holds
    # one position per frame), the first with nothing; both stages compare the same two positions.
    stages = (CheckStage.PROPOSED, CheckStage.PUBLISHED)
    pairs: list[tuple[Position, Position | None]] = []
    for _mark, positions in planned:
        previous: Position | None = None
        for _record, position in positions:
            pairs.append((position, previous))
            previous = position
    check_rows: list[dict[str, Any]] = []
    for outcome in movement_compare_many(pairs):
        values = movement_check_values(outcome=outcome, stage=stages[0], actor=actor)
        values["position_id"] = values.pop("position").pk
        compared_with = values.pop("compared_with")
        values["compared_with_id"] = compared_with.pk if compared_with is not None else None
        created_by = values.pop("created_by")
        values["created_by_id"] = created_by.pk if created_by is not None else None
        values["created_at"] = now
        check_rows.extend([values, values | {"stage": stages[1]}])
    check_ids = insert_rows(MovementCheck, check_rows)
    summaries = {}
    for values, pk in zip(check_rows, check_ids, strict=True):
        summaries[(values["position_id"], values["stage"])] = check_summary(
            SimpleNamespace(pk=pk, **({"statistic": None, "p_value": None} | values))
        )

    events: list[SimpleNamespace] = []
    for mark, positions in planned:
        events.append(_event(audit_actor, "mark_create", mark, mark, after=mark_snapshots[mark.pk]))
        lat = lon = None
        for _record, position in positions:
            proposed = snapshot(position) | {"state": PositionState.PROPOSED, "decided_by_id": None, "decided_at": None}
            proposed |= summaries[(position.pk, stages[0])]
            events.append(
                _event(
                    audit_actor,
                    "position_propose",
                    position,
                    mark,
                    after=proposed,
                    repr_=f"{position.mark_id}: EPSG:{position.frame_epsg} @ {position.epoch_yr:.3f} (proposed)",
                )
            )
            before: dict[str, Any] = {"state": PositionState.PROPOSED, "search_lat_deg": lat, "search_lon_deg": lon}
            lat, lon = position.lat_deg, position.lon_deg
            after = {
                "state": PositionState.PUBLISHED,
                "supersedes_id": None,
                "search_lat_deg": lat,
                "search_lon_deg": lon,
                **summaries[(position.pk, stages[1])],
            }
            events.append(
                _event(audit_actor, "position_publish", position, mark, before=before, after=after, note=PUBLISH_NOTE)
            )
    chain_new_rows(events)
    insert_rows(AuditEvent, [vars(event) for event in events])
    return [mark.code for mark in marks], len(all_positions), []
