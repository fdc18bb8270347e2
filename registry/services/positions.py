"""Writes on positions: propose, publish, reject, withdraw.

States: ``proposed`` → ``published`` → ``superseded``; ``proposed`` →
``rejected``; a ``published`` position may be ``withdrawn``. A published or superseded
position's coordinates never change (model ``save()`` guard and a database trigger).

Publishing supersedes the mark's earlier published position *in the same frame*
(state ``superseded``, ``superseded_at``, ``superseded_by``) in the same transaction.
The mark's search location (``search_lat_deg``/``search_lon_deg``, which on PostgreSQL
drives the generated ``geog`` column) follows the most recently published position
of any frame; withdrawing it falls back to the next most recent published one, or
clears the location. The search location is only for finding marks (frames differ by
up to a few metres); coordinates for use always come from a position with its frame
and epoch. Changing the search location does not bump the mark's edit version.
"""

from __future__ import annotations

from typing import Any

from django.core.exceptions import ValidationError
from django.db import IntegrityError, transaction
from django.utils import timezone

from registry.errors import Conflict
from registry.geodesy.frames import format_epoch
from registry.models import CheckStage, Mark, MarkStatus, MovementVerdict, Position, PositionState
from registry.roles import Ability
from registry.services import position_rules as rules
from registry.services._input import (
    check_keys,
    field_error,
    merge_errors,
    parse_float,
    parse_int,
    parse_note,
    parse_text,
)
from registry.services.access import access_mark_by_code, access_position_by_id
from registry.services.audit import audit_record, snapshot
from registry.services.documents import documents_mark_changed
from registry.services.limits import check_text_limits
from registry.services.movement import comparison_target, movement_compare
from registry.services.movement_checks import check_summary, latest_check, movement_check_store
from registry.services.suspect import lift_suspicion, mark_make_suspect
from registry.services.usability import assess

COV_FIELDS = rules.COV_FIELDS
VEL_FIELDS = rules.VEL_FIELDS
VEL_SIGMA_FIELDS = rules.VEL_SIGMA_FIELDS
PROPOSE_FIELDS = (
    "frame_epsg",
    "epoch_yr",
    "lat_deg",
    "lon_deg",
    "h_m",
    *COV_FIELDS,
    *VEL_FIELDS,
    *VEL_SIGMA_FIELDS,
    "source",
    "note",
)
_REQUIRED_FLOATS = ("epoch_yr", "lat_deg", "lon_deg", "h_m", "cov_ee_m2", "cov_nn_m2", "cov_uu_m2")
# Same limits as the model's CheckConstraints, with codes of their own.
_RANGES = {
    "lat_deg": (-90.0, 90.0, "lat_out_of_range", "Latitude must be between -90 and 90 degrees."),
    "lon_deg": (-180.0, 180.0, "lon_out_of_range", "Longitude must be between -180 and 180 degrees."),
    "h_m": (-1000.0, 10000.0, "h_out_of_range", "Ellipsoidal height must be between -1000 m and 10000 m."),
    "epoch_yr": (
        1900.0,
        2100.0,
        "epoch_out_of_range",
        "Coordinate epoch must be a decimal year between 1900 and 2100.",
    ),
}


def _parse_position(data: Any) -> dict[str, Any]:
    check_keys(data, PROPOSE_FIELDS)
    errors: list[ValidationError] = []
    out: dict[str, Any] = {}

    def attempt(fn, *args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except ValidationError as exc:
            errors.append(exc)
            return None

    out["frame_epsg"] = attempt(parse_int, data, "frame_epsg", required=True)
    for name in _REQUIRED_FLOATS:
        out[name] = attempt(parse_float, data, name, required=True)
    for name in ("cov_en_m2", "cov_eu_m2", "cov_nu_m2"):
        out[name] = attempt(parse_float, data, name) or 0.0
    for name in VEL_FIELDS + VEL_SIGMA_FIELDS:
        out[name] = attempt(parse_float, data, name)
    out["source"] = attempt(parse_text, data, "source", required=True, max_length=200)
    out["note"] = attempt(parse_text, data, "note") or ""
    if errors:
        raise merge_errors(*errors)

    if out["frame_epsg"] is not None:
        problem = rules.frame_problem(out["frame_epsg"])
        if problem:
            errors.append(field_error("frame_epsg", problem, "frame_not_geographic_3d"))
    for name, (lo, hi, code, message) in _RANGES.items():
        if not lo <= out[name] <= hi:
            errors.append(field_error(name, message, code, value=out[name]))
    problems = rules.covariance_problems(out) + rules.velocity_problems(out, out)
    errors.extend(field_error(p.field, p.message, p.code, **p.params) for p in problems)
    if errors:
        raise merge_errors(*errors)
    return out


def position_validate(data: Any) -> dict[str, Any]:
    """The checked values of a position given as ``position_propose`` takes them (nothing is stored)."""
    return _parse_position(data)


def _refresh_search_location(mark_id: int) -> tuple[float | None, float | None]:
    """Point the mark's search location at its most recently published position (or clear it)."""
    latest = (
        Position.objects.filter(mark_id=mark_id, state=PositionState.PUBLISHED)
        .order_by("-decided_at", "-id")
        .values("lat_deg", "lon_deg")
        .first()
    )
    lat, lon = (latest["lat_deg"], latest["lon_deg"]) if latest else (None, None)
    Mark.objects.filter(pk=mark_id).update(search_lat_deg=lat, search_lon_deg=lon)
    return lat, lon


def _require_state(position: Position, *allowed: str, action: str) -> None:
    if position.state not in allowed:
        raise Conflict(
            f"Position {position.pk} is {position.state}; only a {' or '.join(allowed)} position can be {action}.",
            code="invalid_state",
            details={"state": position.state, "allowed": list(allowed)},
        )


def position_propose(*, actor, mark_code: str, data: dict, suspect_on_movement: bool = True) -> Position:
    """Record a proposed position of a mark (technician or manager).

    ``data``: ``frame_epsg`` (geographic 3D CRS), ``epoch_yr``, ``lat_deg``, ``lon_deg``,
    ``h_m`` (ellipsoidal), the east/north/up covariance in m² (``cov_ee_m2``,
    ``cov_nn_m2``, ``cov_uu_m2`` required; ``cov_en_m2``, ``cov_eu_m2``, ``cov_nu_m2``
    default 0), optional velocity (all three of ``vel_e_m_yr``, ``vel_n_m_yr``,
    ``vel_u_m_yr``, with optional sigmas) and ``source``, optional ``note``.

    The movement check against the mark's published position is stored (``services.movement``); when
    it shows possible movement the mark becomes suspect, unless ``suspect_on_movement`` is False (only
    :func:`position_propose_and_publish`, which publishes in the same transaction and so answers it).
    """
    cleaned = _parse_position(data)
    with transaction.atomic():
        mark = access_mark_by_code(actor, mark_code, ability=Ability.RECORD, for_update=True)
        if not assess(mark.status).new_position_allowed:
            raise Conflict(
                f"Mark {mark.code} is recorded as destroyed; a destroyed mark gets no new positions.",
                code="mark_destroyed",
            )
        position = Position(mark=mark, created_by=actor, state=PositionState.PROPOSED, **cleaned)
        check_text_limits(position)
        # Every range of the model's CheckConstraints is checked above with its own code, and the database
        # enforces them again; Django's Python-side constraint check costs one query per constraint (about
        # half the time of a batch import, benchmarks/bench_occupation_import.py), so it is skipped here, as is
        # the query that re-reads the mark and user just fetched (foreign keys; the database checks them too).
        position.full_clean(exclude=("mark", "created_by"), validate_constraints=False)
        position.save(force_insert=True)
        check = movement_check_store(
            outcome=movement_compare(position=position, published=comparison_target(position)),
            stage=CheckStage.PROPOSED,
            actor=actor,
        )
        audit_record(
            actor=actor,
            action="position_propose",
            obj=position,
            after={**snapshot(position), **check_summary(check)},
            mark=mark,
        )
        if suspect_on_movement and check.verdict == MovementVerdict.POSSIBLE_MOVEMENT:
            mark_make_suspect(
                mark=mark,
                reason=(
                    f"a position proposed on {timezone.now().date().isoformat()} (EPSG:{position.frame_epsg}, epoch "
                    f"{format_epoch(position.epoch_yr)}) differs from the published position (EPSG:"
                    f"{check.compared_with.frame_epsg}, epoch {format_epoch(check.compared_with.epoch_yr)}) more "
                    "than their uncertainties allow (possible movement)"
                ),
                since=timezone.now().date(),
                actor=actor,
            )
    return position


#: ``compared_with`` not given: the published position of the check stored when the position was proposed.
AS_PROPOSED: Any = object()


def position_publish(*, actor, position_id: int, note: str = "", compared_with: Any = AS_PROPOSED) -> Position:
    """Publish a proposed position (manager); supersede the earlier one of the same mark and frame.

    ``compared_with`` names the published position (id, or None for "none") the manager compared the
    proposal with; by default the one of the check stored when it was proposed (a proposal recorded
    before checks were stored, e.g. by ``load_demo``, has none: then the current one is taken). If the mark's published
    position is another one now (someone published meanwhile), publishing is refused
    (``compared_with_changed``): look at the new comparison and decide again. The movement check is run
    again under the mark's lock and stored with the decision; against "possible movement" a ``note`` (the
    reason) is required (``movement_note_required``). The audit row keeps the check's verdict, T and p.

    A suspect mark becomes active again (a new position answers the suspicion; ``services.suspect``);
    the change is recorded in the ``position_publish`` audit row (``mark_status`` and the suspicion
    before and after) and bumps the mark's version.
    """
    note = parse_note(note, required=False)
    if compared_with is not AS_PROPOSED and compared_with is not None:
        compared_with = parse_int({"compared_with": compared_with}, "compared_with")
    with transaction.atomic():
        position = access_position_by_id(actor, position_id, ability=Ability.MANAGE, for_update=True)
        mark = Mark.objects.select_for_update().get(pk=position.mark_id)
        _require_state(position, PositionState.PROPOSED, action="published")
        if mark.status == MarkStatus.DESTROYED:
            raise Conflict(
                f"Mark {mark.code} is recorded as destroyed; its positions cannot be published.",
                code="mark_destroyed",
            )
        target = comparison_target(position)
        if compared_with is AS_PROPOSED:
            stored = latest_check(position.pk, CheckStage.PROPOSED)
            expected = stored.compared_with_id if stored is not None else (target.pk if target else None)
        else:
            expected = compared_with
        current = target.pk if target else None
        if expected != current:
            raise Conflict(
                f"Position {position.pk} was compared with "
                + (f"published position {expected}" if expected else "no published position")
                + f", but the published position of {mark.code} is now "
                + (f"position {current}" if current else "none")
                + ". Someone decided in between: look at the new comparison and decide again.",
                code="compared_with_changed",
                details={"compared_with": expected, "published_now": current},
            )
        check = movement_check_store(
            outcome=movement_compare(position=position, published=target), stage=CheckStage.PUBLISHED, actor=actor
        )
        if check.verdict == MovementVerdict.POSSIBLE_MOVEMENT and not note:
            raise field_error(
                "note",
                "The movement check shows possible movement against the published position; give the reason "
                "for publishing anyway.",
                "movement_note_required",
            )
        now = timezone.now()
        previous = (
            Position.objects.select_for_update()
            .filter(mark_id=mark.pk, frame_epsg=position.frame_epsg, state=PositionState.PUBLISHED)
            .first()
        )
        if previous is not None:
            previous.state = PositionState.SUPERSEDED
            previous.superseded_at = now
            previous.superseded_by = position
            previous.save(update_fields=["state", "superseded_at", "superseded_by"])
            audit_record(
                actor=actor,
                action="position_supersede",
                obj=previous,
                before={"state": PositionState.PUBLISHED},
                after={"state": PositionState.SUPERSEDED, "superseded_at": now, "superseded_by_id": position.pk},
                mark=mark,
            )
        position.state = PositionState.PUBLISHED
        position.decided_by = actor if getattr(actor, "is_authenticated", False) else None
        position.decided_at = now
        try:
            position.save(update_fields=["state", "decided_by", "decided_at"])
        except IntegrityError:  # the partial unique index: someone published in between
            raise Conflict(
                f"Another position of {mark.code} in EPSG:{position.frame_epsg} was published at the same time.",
                code="already_published",
            ) from None
        lat, lon = _refresh_search_location(mark.pk)
        before = {
            "state": PositionState.PROPOSED,
            "search_lat_deg": mark.search_lat_deg,
            "search_lon_deg": mark.search_lon_deg,
        }
        after = {
            "state": PositionState.PUBLISHED,
            "supersedes_id": previous.pk if previous else None,
            "search_lat_deg": lat,
            "search_lon_deg": lon,
            **check_summary(check),
        }
        lifted = lift_suspicion(mark)
        if lifted is not None:
            before.update({f"mark_{k}": v for k, v in lifted["before"].items()})
            after.update({f"mark_{k}": v for k, v in lifted["after"].items()})
        audit_record(
            actor=actor,
            action="position_publish",
            obj=position,
            before=before,
            after=after,
            note=note,
            mark=mark,
        )
        documents_mark_changed(mark, f"position published in EPSG:{position.frame_epsg}", actor=actor)
    return position


def position_propose_and_publish(*, actor, mark_code: str, data: dict, note: str) -> Position:
    """Propose and publish at once (imports): both checks stored and audited, the publish rules apply."""
    with transaction.atomic():
        proposed = position_propose(actor=actor, mark_code=mark_code, data=data, suspect_on_movement=False)
        return position_publish(actor=actor, position_id=proposed.pk, note=note)


def position_reject(*, actor, position_id: int, note: str) -> Position:
    """Reject a proposed position (manager), with the reason in ``note``."""
    note = parse_note(note, required=True, what="the rejection")
    with transaction.atomic():
        position = access_position_by_id(actor, position_id, ability=Ability.MANAGE, for_update=True)
        _require_state(position, PositionState.PROPOSED, action="rejected")
        position.state = PositionState.REJECTED
        position.decided_by = actor if getattr(actor, "is_authenticated", False) else None
        position.decided_at = timezone.now()
        position.save(update_fields=["state", "decided_by", "decided_at"])
        audit_record(
            actor=actor,
            action="position_reject",
            obj=position,
            before={"state": PositionState.PROPOSED},
            after={"state": PositionState.REJECTED},
            note=note,
        )
    return position


def position_withdraw(*, actor, position_id: int, note: str) -> Position:
    """Withdraw a published position (manager), with the reason in ``note``.

    The earlier, superseded position is not reinstated (a superseded position stays
    superseded); the search location falls back to another published position of the
    mark, or is cleared.
    """
    note = parse_note(note, required=True, what="the withdrawal")
    with transaction.atomic():
        position = access_position_by_id(actor, position_id, ability=Ability.MANAGE, for_update=True)
        mark = Mark.objects.select_for_update().get(pk=position.mark_id)
        _require_state(position, PositionState.PUBLISHED, action="withdrawn")
        position.state = PositionState.WITHDRAWN
        position.decided_by = actor if getattr(actor, "is_authenticated", False) else None
        position.decided_at = timezone.now()
        position.save(update_fields=["state", "decided_by", "decided_at"])
        lat, lon = _refresh_search_location(mark.pk)
        audit_record(
            actor=actor,
            action="position_withdraw",
            obj=position,
            before={
                "state": PositionState.PUBLISHED,
                "search_lat_deg": mark.search_lat_deg,
                "search_lon_deg": mark.search_lon_deg,
            },
            after={"state": PositionState.WITHDRAWN, "search_lat_deg": lat, "search_lon_deg": lon},
            note=note,
            mark=mark,
        )
        documents_mark_changed(mark, f"published position in EPSG:{position.frame_epsg} withdrawn", actor=actor)
    return position
