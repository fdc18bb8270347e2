"""A mark's change history for its page: audit events with their per-field changes in words.

A fixed number of queries whatever the number of events (what the events point at is read once).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from registry.models import AuditEvent, Mark, Occupation, Position, Visit

HISTORY_LIMIT = 200


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
