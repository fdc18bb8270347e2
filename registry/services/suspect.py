"""Suspect marks: a mark awaiting re-observation, and the only ways in and out of that status.

A mark becomes **suspect** (``MarkStatus.SUSPECT``, with ``suspect_since`` and ``suspect_reason``):

* when a visit that found it ``disturbed`` or ``searched_not_found`` is recorded on an *active* mark and
  is dated on or after the publication date (``decided_at``, UTC day) of the mark's newest published
  position, or the mark has no published position (:func:`visit_suspicion`, called by
  ``services.fieldwork.visit_record`` in the visit's transaction, so pages, API, imports and commands
  obey it alike). A later ``intact`` visit does not clear it: what the crew saw does not re-establish
  the coordinates;
* through :func:`mark_make_suspect`, the helper every such rule calls inside its transaction (a failed
  movement check will call it too).

It stops being suspect (back to ``active``):

* when a new position of the mark is published (``services.positions.position_publish`` calls
  :func:`lift_suspicion` and records it in its own audit row), or
* by a manager's clearance, :func:`mark_clear_suspect` (note required, optimistic version, audited).

The generic status action (``services.marks.mark_set_status``) is no back door: it never sets
``suspect`` and never moves a suspect mark to ``active``. It may retire a suspect mark or record it
destroyed (with the usual note; that ends the suspicion, and its audit row keeps what it was). When a
retired or destroyed mark is made active again, the visit rule is applied to its stored visits at once
(:func:`history_suspicion`): if its latest disturbed or not-found visit is not older than its newest
published position, it comes back suspect. Visits never change a retired or destroyed mark.

Every change bumps the mark's edit version (a file or a form made before it is stale) and writes an
audit row: ``mark_make_suspect``, ``mark_clear_suspect`` (and ``mark_clear_suspect_refused`` for a stale
clearance).
"""

from __future__ import annotations

import datetime as dt
from typing import Any

from django.db import transaction
from django.db.models import F, Max
from django.utils import timezone

from registry.errors import Conflict
from registry.models import SUSPECT_FINDINGS, Finding, Mark, MarkStatus, Position, PositionState, Visit
from registry.roles import Ability
from registry.services._input import parse_note
from registry.services.access import access_mark_by_code
from registry.services.audit import audit_record
from registry.services.documents import documents_mark_changed

#: Longest reason stored (the model's max_length).
REASON_MAX = 200

_REASON_WORDS: dict[str, str] = {
    Finding.DISTURBED: "the visit of {day} found it disturbed",
    Finding.SEARCHED_NOT_FOUND: "the visit of {day} searched for it and did not find it",
}


def visit_reason(finding: str, day: dt.date) -> str:
    """The words kept as ``suspect_reason`` for a visit with ``finding`` on ``day``.

    >>> visit_reason("disturbed", dt.date(2025, 3, 4))
    'the visit of 2025-03-04 found it disturbed'
    """
    return _REASON_WORDS[finding].format(day=day.isoformat())


def newest_publication_day(mark_id: int) -> dt.date | None:
    """The UTC day on which the mark's newest published position was published (None: none published)."""
    moment = Position.objects.filter(mark_id=mark_id, state=PositionState.PUBLISHED).aggregate(m=Max("decided_at"))["m"]
    return None if moment is None else timezone.localtime(moment, dt.UTC).date()


def mark_make_suspect(*, mark: Mark, reason: str, since: dt.date, actor, note: str = "") -> bool:
    """Make an active ``mark`` suspect; call it inside the transaction of the action that found the cause.

    The caller has decided that the mark is to be suspect and holds its row (``select_for_update``).
    Only an active mark changes: a mark that is already suspect keeps its first reason and date, and a
    retired or destroyed mark is left alone. The change bumps the mark's version and is audited
    (``mark_make_suspect``). ``mark`` is refreshed in place.

    Parameters
    ----------
    mark
        The mark (a model instance).
    reason
        Plain words shown to users ("the visit of 2025-03-04 found it disturbed"); cut to 200 characters.
    since
        The day the cause was observed (a visit's date, a check's observation date).
    actor
        Who caused it (the user recording the visit, publishing the check...), or None for a system step.
    note
        Optional extra text for the audit row.

    Returns
    -------
    bool
        True when the mark became suspect now.
    """
    reason = (reason or "").strip()[:REASON_MAX]
    updated = Mark.objects.filter(pk=mark.pk, status=MarkStatus.ACTIVE).update(
        status=MarkStatus.SUSPECT,
        suspect_since=since,
        suspect_reason=reason,
        version=F("version") + 1,
        updated_at=timezone.now(),
    )
    if not updated:
        return False
    before_version = mark.version
    mark.refresh_from_db(fields=["status", "suspect_since", "suspect_reason", "version", "updated_at"])
    audit_record(
        actor=actor,
        action="mark_make_suspect",
        obj=mark,
        before={"status": MarkStatus.ACTIVE, "version": before_version},
        after={
            "status": MarkStatus.SUSPECT,
            "suspect_since": since,
            "suspect_reason": reason,
            "version": mark.version,
        },
        note=note,
    )
    documents_mark_changed(mark, f"status changed from active to suspect ({reason})", actor=actor)
    return True


def visit_suspicion(*, visit: Visit, mark: Mark, actor) -> bool:
    """Apply the visit rule (module docstring) to a visit just recorded; True when the mark became suspect."""
    if visit.finding not in SUSPECT_FINDINGS or mark.status != MarkStatus.ACTIVE:
        return False
    published = newest_publication_day(mark.pk)
    if published is not None and visit.visited_on < published:
        return False  # an older report: a position published since then already answers it
    return mark_make_suspect(
        mark=mark, reason=visit_reason(visit.finding, visit.visited_on), since=visit.visited_on, actor=actor
    )


def lift_suspicion(mark: Mark) -> dict[str, Any] | None:
    """A suspect mark made active again: inside ``position_publish`` (a newly published position) and
    by a manager's clearance (:func:`mark_clear_suspect`).

    Bumps the version. Returns the ``before``/``after`` values for the caller's audit row, or None when
    the mark was not suspect.
    """
    if mark.status != MarkStatus.SUSPECT:
        return None
    before = {
        "status": mark.status,
        "suspect_since": mark.suspect_since,
        "suspect_reason": mark.suspect_reason,
        "version": mark.version,
    }
    Mark.objects.filter(pk=mark.pk).update(
        status=MarkStatus.ACTIVE,
        suspect_since=None,
        suspect_reason="",
        version=F("version") + 1,
        updated_at=timezone.now(),
    )
    mark.refresh_from_db(fields=["status", "suspect_since", "suspect_reason", "version", "updated_at"])
    after = {"status": mark.status, "suspect_since": None, "suspect_reason": "", "version": mark.version}
    return {"before": before, "after": after}


def mark_clear_suspect(*, actor, code: str, note: str, expected_version: Any) -> Mark:
    """A manager's clearance: a suspect mark goes back to active, with the reason in ``note``.

    Raises
    ------
    registry.errors.NotFound
        No such mark (or the actor may not view the registry).
    registry.errors.PermissionDeniedError
        The actor is not a manager (ability MANAGE).
    django.core.exceptions.ValidationError
        ``note_required``, ``version_required``, ``invalid_version``.
    registry.errors.Conflict
        ``stale_version`` (someone changed the mark since ``expected_version``; audited as
        ``mark_clear_suspect_refused``) or ``not_suspect``.
    """
    from registry.services.marks import _conflict, _parse_version

    version = _parse_version(expected_version)
    note = parse_note(note, required=True, what="clearing the suspicion")
    conflict: Conflict | None = None
    with transaction.atomic():
        mark = access_mark_by_code(actor, code, ability=Ability.MANAGE, for_update=True)
        if mark.version != version:
            current, conflict = _conflict(mark.pk, {"status": MarkStatus.ACTIVE}, version)
            audit_record(
                actor=actor,
                action="mark_clear_suspect_refused",
                obj=current,
                before={"status": current.status, "version": current.version},
                after={"status": MarkStatus.ACTIVE, "version": version},
                note=note,
            )
        elif mark.status != MarkStatus.SUSPECT:
            raise Conflict(
                f"Mark {mark.code} is {mark.get_status_display()}, not suspect; there is nothing to clear.",
                code="not_suspect",
                details={"status": mark.status},
            )
        else:
            change = lift_suspicion(mark)  # the same change a newly published position makes
            assert change is not None  # the mark is suspect (checked above)
            audit_record(
                actor=actor,
                action="mark_clear_suspect",
                obj=mark,
                before=change["before"],
                after=change["after"],
                note=note,
            )
            documents_mark_changed(mark, "status changed from suspect to active (cleared)", actor=actor)
    if conflict is not None:
        raise conflict
    return mark


def _latest_suspect_visit(mark_id: int) -> Visit | None:
    return (
        Visit.objects.filter(mark_id=mark_id, finding__in=SUSPECT_FINDINGS)
        .order_by("-visited_on", "-created_at", "-id")
        .first()
    )


def history_suspicion(*, mark: Mark, actor, note: str = "") -> bool:
    """Apply the visit rule to the visits already stored for one active ``mark`` (row held by the caller).

    The mark becomes suspect when its latest disturbed or not-found visit is dated on or after its newest
    publication day, or it has no published position. True when it became suspect now.
    """
    if mark.status != MarkStatus.ACTIVE:
        return False
    visit = _latest_suspect_visit(mark.pk)
    if visit is None:
        return False
    published = newest_publication_day(mark.pk)
    if published is not None and visit.visited_on < published:
        return False
    return mark_make_suspect(
        mark=mark, reason=visit_reason(visit.finding, visit.visited_on), since=visit.visited_on, actor=actor, note=note
    )


def suspects_from_history(*, actor, note: str = "") -> list[str]:
    """:func:`history_suspicion` for every active mark with a disturbed or not-found visit (``load_demo``).

    Migration 0006 applies the same rule to an existing registry. Returns the codes made suspect.
    """
    ids = (
        Visit.objects.filter(finding__in=SUSPECT_FINDINGS, mark__status=MarkStatus.ACTIVE)
        .values_list("mark_id", flat=True)
        .distinct()
    )
    made = []
    with transaction.atomic():
        for mark in Mark.objects.select_for_update().filter(pk__in=list(ids)).order_by("code"):
            if history_suspicion(mark=mark, actor=actor, note=note):
                made.append(mark.code)
    return made
