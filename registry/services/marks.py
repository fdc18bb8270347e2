"""Writes on marks: create, edit (with optimistic concurrency), change status.

Suspect marks have their own rules and functions (``registry.services.suspect``); here
``mark_set_status`` refuses to set ``suspect`` or to make a suspect mark active (see
:func:`mark_set_status`), and ``mark_create`` refuses to create a mark as suspect.

Every function checks the actor's role, validates with the model's own validators
(``full_clean``; each ``ValidationError`` carries a ``code``), runs in one
transaction and appends an audit event.

Optimistic concurrency: an edit names the ``version`` it started from. The UPDATE is
conditional on that version and bumps it, so of two edits made from the same version
the first wins and the second raises :class:`registry.errors.Conflict`. Its
``details`` give, per submitted field, ``yours`` (what was submitted), ``theirs``
(what is stored now) and, when the audit trail knows it, who changed that field and
when. The refused attempt is recorded in the audit trail too
(``mark_update_refused`` / ``mark_set_status_refused``), so both submissions stay
visible.
"""

from __future__ import annotations

import copy
from typing import Any

from django.core.exceptions import ValidationError
from django.db import transaction
from django.db.models import F
from django.utils import timezone

from registry.errors import Conflict
from registry.models import DESCRIPTION_FIELDS, AuditEvent, Mark, MarkStatus
from registry.roles import Ability
from registry.services._input import parse_note
from registry.services.access import access_mark_by_code, require_ability
from registry.services.audit import audit_record, create_audited, json_safe
from registry.services.documents import documents_mark_changed
from registry.services.limits import check_text_limits
from registry.vocabulary import OLD_MARK_FIELDS, rename_old_keys

# Descriptive fields a manager edits with mark_update (the description block in its display order).
EDITABLE_FIELDS: tuple[str, ...] = ("name", *DESCRIPTION_FIELDS, "notes")
# Descriptive fields a station description sheet prints (a change makes its signed sheets out of date).
SHEET_FIELDS = frozenset(EDITABLE_FIELDS) - {"notes"}
# Fields accepted when a mark is created (status defaults to active).
CREATE_FIELDS: tuple[str, ...] = ("code", *EDITABLE_FIELDS, "status")
# Fields that exist but change only through their own service.
_NOT_EDITABLE_HINT = {
    "code": "A mark's code is its identity and does not change.",
    "status": "Use the status action (mark_set_status).",
    "suspect_since": "A mark becomes suspect from a visit or a check, and is cleared by a manager or a new position.",
    "suspect_reason": "A mark becomes suspect from a visit or a check, and is cleared by a manager or a new position.",
    "search_lat_deg": "The search location follows the published positions.",
    "search_lon_deg": "The search location follows the published positions.",
    "version": "Send the version you started from separately, as expected_version.",
}
# The largest value of a PositiveIntegerField on every supported database.
_MAX_VERSION = 2_147_483_647
# Audit actions that bump a mark's edit version.
VERSIONED_ACTIONS = ("mark_update", "mark_set_status", "mark_make_suspect", "mark_clear_suspect")
# Statuses that need a reason in the note.
_STATUS_NEEDS_NOTE = {MarkStatus.RETIRED, MarkStatus.DESTROYED}


def _clean_input(data: Any, allowed: tuple[str, ...]) -> dict[str, Any]:
    """Check the keys and the types of submitted values; strings are stripped."""
    if not isinstance(data, dict):
        raise ValidationError("Send the fields as an object.", code="invalid_payload")
    data = rename_old_keys(data, OLD_MARK_FIELDS)  # the earlier names, accepted for one more release
    errors: dict[str, list[ValidationError]] = {}
    cleaned: dict[str, Any] = {}
    for key, value in data.items():
        if key not in allowed:
            if key in _NOT_EDITABLE_HINT:
                msg, code = f"'{key}' cannot be set here. {_NOT_EDITABLE_HINT[key]}", "not_editable"
            else:
                msg, code = f"Unknown field '{key}'.", "unknown_field"
            errors[str(key)] = [ValidationError(msg, code=code, params={"field": key})]
            continue
        if value is None:
            value = ""
        if not isinstance(value, str):
            errors[key] = [ValidationError("Expected text.", code="invalid_type", params={"field": key})]
            continue
        if "\x00" in value:
            errors[key] = [
                ValidationError(
                    "Null characters are not allowed.", code="null_characters_not_allowed", params={"field": key}
                )
            ]
            continue
        cleaned[key] = value.strip()
    if errors:
        raise ValidationError(errors)
    return cleaned


def _validate_on(mark: Mark, changes: dict[str, Any]) -> Mark:
    """Apply ``changes`` to a copy of ``mark`` and validate the changed fields."""
    candidate = copy.copy(mark)
    for key, value in changes.items():
        setattr(candidate, key, value)
    untouched = [f.name for f in Mark._meta.concrete_fields if f.name not in changes]
    check_text_limits(candidate, fields=set(changes))
    candidate.full_clean(exclude=untouched, validate_constraints=True)
    return candidate


def _parse_version(expected_version: Any) -> int:
    if expected_version is None or expected_version == "":
        raise ValidationError(
            {"version": ValidationError("Send the version you started from.", code="version_required")}
        )
    if isinstance(expected_version, bool):
        raise ValidationError({"version": ValidationError("The version is a whole number.", code="invalid_version")})
    try:
        value = int(expected_version)
    except (TypeError, ValueError):
        raise ValidationError(
            {"version": ValidationError("The version is a whole number.", code="invalid_version")}
        ) from None
    if value < 1 or value > _MAX_VERSION or (isinstance(expected_version, float) and expected_version != value):
        raise ValidationError({"version": ValidationError("The version is a whole number.", code="invalid_version")})
    return value


def _who_changed(mark: Mark, field: str, since_version: int) -> tuple[str | None, str | None]:
    """Who last changed ``field`` of ``mark`` after ``since_version``, from the audit trail."""
    events = (
        AuditEvent.objects.filter(mark=mark, action__in=VERSIONED_ACTIONS)
        .select_related("actor")
        .order_by("-at", "-id")[:200]
    )
    for event in events:
        after = event.after or {}
        if field in after and int(after.get("version", 0) or 0) > since_version:
            if event.actor is None:
                return None, event.at.isoformat()
            return (event.actor.get_full_name() or event.actor.get_username(), event.at.isoformat())
    return None, None


def _conflict(mark_id: int, submitted: dict[str, Any], expected_version: int) -> tuple[Mark, Conflict]:
    current = Mark.objects.get(pk=mark_id)
    details: dict[str, Any] = {}
    for field, yours in submitted.items():
        by, at = _who_changed(current, field, expected_version)
        details[field] = {
            "yours": json_safe(yours),
            "theirs": json_safe(getattr(current, field)),
            "changed_by": by,
            "changed_at": at,
        }
    details["version"] = {"yours": expected_version, "theirs": current.version, "changed_by": None, "changed_at": None}
    conflict = Conflict(
        f"Mark {current.code} was changed by someone else since version {expected_version} "
        f"(it is now at version {current.version}). Nothing was saved; review their values and submit again.",
        code="stale_version",
        details=details,
    )
    return current, conflict


def mark_from_input(data: dict[str, Any]) -> Mark:
    """The unsaved mark of a creation's input: cleaned, a code required, not created suspect, texts within
    their limits. The model's own checks (``full_clean``) are the caller's: ``mark_create`` runs them, the
    batch import runs them once per distinct value."""
    cleaned = _clean_input(data, CREATE_FIELDS)
    if not cleaned.get("code"):
        raise ValidationError({"code": ValidationError("A mark needs a code.", code="required")})
    if cleaned.get("status") == MarkStatus.SUSPECT:
        raise ValidationError({"status": _suspect_not_settable()})
    mark = Mark(**cleaned)
    check_text_limits(mark)
    return mark


def mark_create(*, actor, data: dict) -> Mark:
    """Create a mark from ``data`` (``code`` plus any of the descriptive fields and ``status``).

    Raises
    ------
    registry.errors.PermissionDeniedError
        Unless the actor may manage marks.
    django.core.exceptions.ValidationError
        With codes such as ``invalid_code``, ``unique``, ``required``, ``invalid_choice``,
        ``unknown_field``.
    """
    require_ability(actor, Ability.MANAGE)
    mark = mark_from_input(data)
    mark.full_clean()
    # full_clean checked the code; two creations of the same code at once: the unique index decides
    return create_audited(mark, actor=actor, action="mark_create", what="mark", check_code_first=False)


def mark_update(*, actor, code: str, expected_version: int, changes: dict, base: dict | None = None) -> Mark:
    """Edit descriptive fields of a mark, starting from ``expected_version``.

    Submitted values equal to the stored ones change nothing (no version bump, no
    audit row) as long as the version is current.

    Three-way merge: with ``base`` (the values of the changed fields as the user loaded them at
    ``expected_version``), a stale edit is not refused outright. Only the fields in ``changes`` are
    compared: a field someone else changed meanwhile conflicts only if they changed it too and to
    a different value; if no field conflicts, the changes are applied on top of the stored version
    (the audit row's note says so). Without ``base`` (API, imports) any stale version is refused.

    Raises
    ------
    registry.errors.NotFound
        No such mark (or the actor may not view the registry).
    registry.errors.PermissionDeniedError
        The actor may view but not manage marks.
    django.core.exceptions.ValidationError
        Bad input (``version_required``, ``invalid_version``, ``not_editable``,
        ``unknown_field``, ``no_changes``, the model's own codes).
    registry.errors.Conflict
        Code ``stale_version``: someone saved the mark since ``expected_version``.
    """
    version = _parse_version(expected_version)
    cleaned = _clean_input(changes, EDITABLE_FIELDS)
    if not cleaned:
        raise ValidationError("Nothing to change.", code="no_changes")
    conflict: Conflict | None = None
    merged_over: int | None = None
    with transaction.atomic():
        mark = access_mark_by_code(actor, code, ability=Ability.MANAGE)
        _validate_on(mark, cleaned)
        if base is not None and mark.version > version:
            loaded = _clean_input({k: base[k] for k in cleaned if k in base}, EDITABLE_FIELDS)
            clashes = [
                k
                for k, mine in cleaned.items()
                if k not in loaded or (getattr(mark, k) != loaded[k] and getattr(mark, k) != mine)
            ]
            if not clashes:
                merged_over, version = version, mark.version
        diff = {k: v for k, v in cleaned.items() if getattr(mark, k) != v}
        if not diff and mark.version == version:
            return mark
        before = {k: getattr(mark, k) for k in diff}
        now = timezone.now()
        updated = Mark.objects.filter(pk=mark.pk, version=version).update(
            **diff, version=F("version") + 1, updated_at=now
        )
        if updated == 0:
            if base is not None:
                loaded = _clean_input({k: base[k] for k in cleaned if k in base}, EDITABLE_FIELDS)
                current = Mark.objects.get(pk=mark.pk)
                changed_since = {
                    k: v
                    for k, v in cleaned.items()
                    if k not in loaded or (getattr(current, k) != loaded[k] and getattr(current, k) != v)
                }
                current, conflict = _conflict(mark.pk, changed_since or cleaned, version)
            else:
                current, conflict = _conflict(mark.pk, cleaned, version)
            audit_record(
                actor=actor,
                action="mark_update_refused",
                obj=current,
                before={**{k: getattr(current, k) for k in cleaned}, "version": current.version},
                after={**cleaned, "version": version},
                note=conflict.message,
            )
        else:
            mark.refresh_from_db()
            audit_record(
                actor=actor,
                action="mark_update",
                obj=mark,
                before={**before, "version": version},
                after={**diff, "version": mark.version},
                note=(
                    f"Started from version {merged_over}; merged over version {version}: the fields changed "
                    "meanwhile by others were not touched."
                    if merged_over is not None
                    else ""
                ),
            )
            printed = sorted(set(diff) & SHEET_FIELDS)
            if printed:
                documents_mark_changed(mark, f"description changed ({', '.join(printed)})", actor=actor)
    if conflict is not None:
        raise conflict
    return mark


def _suspect_not_settable() -> ValidationError:
    return ValidationError(
        "A mark becomes suspect when a visit finds it disturbed or does not find it; record the visit.",
        code="suspect_not_settable",
    )


def mark_set_status(*, actor, code: str, status: str, expected_version: int, note: str = "") -> Mark:
    """Set a mark's status (active, retired, destroyed), starting from ``expected_version``.

    Retiring a mark or reporting it destroyed needs a reason in ``note``.
    The same concurrency rule as :func:`mark_update` applies.

    ``suspect`` is not set here (``suspect_not_settable``: visits and checks set it,
    ``registry.services.suspect``), and a suspect mark is not made active here
    (``suspect_needs_clearance``: a manager's clearance or a new published position does that).
    A suspect mark may be retired or recorded destroyed (that ends the suspicion; the audit row keeps
    what it was). A retired or destroyed mark made active again gets the visit rule applied at once: if
    its latest disturbed or not-found visit is not older than its newest published position, it comes
    back suspect (``services.suspect.history_suspicion``, audited).
    """
    version = _parse_version(expected_version)
    if status not in MarkStatus.values:
        raise ValidationError(
            {"status": ValidationError("Unknown status %(value)r.", code="invalid_choice", params={"value": status})}
        )
    if status == MarkStatus.SUSPECT:
        raise ValidationError({"status": _suspect_not_settable()})
    note = parse_note(note, required=status in _STATUS_NEEDS_NOTE, what="this status")
    conflict: Conflict | None = None
    with transaction.atomic():
        mark = access_mark_by_code(actor, code, ability=Ability.MANAGE, for_update=True)
        if mark.status == MarkStatus.SUSPECT and status == MarkStatus.ACTIVE:
            raise ValidationError(
                {
                    "status": ValidationError(
                        "Mark %(code)s is suspect (%(reason)s). Clear the suspicion with a note, or publish a new "
                        "position, to make it active.",
                        code="suspect_needs_clearance",
                        params={"code": mark.code, "reason": mark.suspect_reason or "awaiting re-observation"},
                    )
                }
            )
        # Same status: a no-op whatever version the caller started from (no version bump, no audit row).
        if mark.status == status:
            raise ValidationError(
                {
                    "status": ValidationError(
                        "The mark is already %(value)s.", code="status_unchanged", params={"value": status}
                    )
                }
            )
        before_status = mark.status
        before = {"status": before_status, "version": version}
        ending_suspicion = {}
        if before_status == MarkStatus.SUSPECT:  # retired or recorded destroyed: that ends the suspicion
            before.update(suspect_since=mark.suspect_since, suspect_reason=mark.suspect_reason)
            ending_suspicion = {"suspect_since": None, "suspect_reason": ""}
        updated = Mark.objects.filter(pk=mark.pk, version=version).update(
            status=status, version=F("version") + 1, updated_at=timezone.now(), **ending_suspicion
        )
        if updated == 0:
            current, conflict = _conflict(mark.pk, {"status": status}, version)
            audit_record(
                actor=actor,
                action="mark_set_status_refused",
                obj=current,
                before={"status": current.status, "version": current.version},
                after={"status": status, "version": version},
                note=note,
            )
        else:
            mark.refresh_from_db()
            audit_record(
                actor=actor,
                action="mark_set_status",
                obj=mark,
                before=before,
                after={"status": status, "version": mark.version, **ending_suspicion},
                note=note,
            )
            documents_mark_changed(mark, f"status changed from {before_status} to {status}", actor=actor)
            if status == MarkStatus.ACTIVE:  # back into use: the visits may still say it is suspect
                from registry.services.suspect import history_suspicion

                history_suspicion(mark=mark, actor=actor, note="made active again; its last visit report stands")
    if conflict is not None:
        raise conflict
    return mark
