"""Writes on positions: propose, publish, reject, withdraw.

States (brief §2): ``proposed`` → ``published`` → ``superseded``; ``proposed`` →
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

from functools import lru_cache
from typing import Any

import numpy as np
from django.core.exceptions import ValidationError
from django.db import IntegrityError, transaction
from django.utils import timezone

from registry.errors import Conflict
from registry.models import Mark, MarkStatus, Position, PositionState
from registry.roles import Ability
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
from registry.services.suspect import lift_suspicion

COV_FIELDS = ("cov_ee_m2", "cov_en_m2", "cov_eu_m2", "cov_nn_m2", "cov_nu_m2", "cov_uu_m2")
VEL_FIELDS = ("vel_e_m_yr", "vel_n_m_yr", "vel_u_m_yr")
VEL_SIGMA_FIELDS = ("vel_sigma_e_m_yr", "vel_sigma_n_m_yr", "vel_sigma_u_m_yr")
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
# Largest variance accepted (σ = 100 m): beyond that a value is a unit mistake (mm² for m²...),
# not a coordinate anyone should find in a control registry.
MAX_VARIANCE_M2 = 100.0**2
# A covariance matrix may have an eigenvalue this far below zero (relative to its
# largest) and still count as positive semi-definite: rounding of published values.
_PSD_RELATIVE_TOLERANCE = 1e-9


@lru_cache(maxsize=256)
@lru_cache(maxsize=256)
def _frame_problem(frame_epsg: int) -> str | None:
    """Why ``frame_epsg`` cannot carry a position, or ``None`` when it is a geographic 3D CRS."""
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    try:
        crs = CRS.from_epsg(frame_epsg)
    except CRSError:
        return f"EPSG:{frame_epsg} is not a coordinate reference system known to PROJ."
    if not crs.is_geographic or len(crs.axis_info) != 3:
        return (
            f"EPSG:{frame_epsg} ({crs.name}) is a {crs.type_name}; a position needs a geographic 3D CRS "
            "(latitude, longitude, ellipsoidal height), e.g. EPSG:7912 or EPSG:6319."
        )
    return None


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
        problem = _frame_problem(out["frame_epsg"])
        if problem:
            errors.append(field_error("frame_epsg", problem, "frame_not_geographic_3d"))
    for name, (lo, hi, code, message) in _RANGES.items():
        if not lo <= out[name] <= hi:
            errors.append(field_error(name, message, code, value=out[name]))
    for name in ("cov_ee_m2", "cov_nn_m2", "cov_uu_m2"):
        if out[name] < 0:
            errors.append(field_error(name, "A variance cannot be negative.", "negative_variance"))
        elif out[name] > MAX_VARIANCE_M2:
            errors.append(
                field_error(
                    name,
                    "A variance above %(limit)s m² (σ = 100 m) is refused; covariances are in m².",
                    "variance_too_large",
                    limit=MAX_VARIANCE_M2,
                )
            )
    for name in VEL_SIGMA_FIELDS:
        if out[name] is not None and out[name] < 0:
            errors.append(field_error(name, "A sigma cannot be negative.", "negative_sigma"))
    given = [out[n] is not None for n in VEL_FIELDS]
    if any(given) and not all(given):
        errors.append(field_error("vel_e_m_yr", "Give all three velocity components or none.", "velocity_incomplete"))
    if not any(given) and any(out[n] is not None for n in VEL_SIGMA_FIELDS):
        errors.append(
            field_error("vel_sigma_e_m_yr", "Velocity sigmas need a velocity.", "velocity_sigma_without_velocity")
        )
    if errors:
        raise merge_errors(*errors)

    cov = np.array(
        [
            [out["cov_ee_m2"], out["cov_en_m2"], out["cov_eu_m2"]],
            [out["cov_en_m2"], out["cov_nn_m2"], out["cov_nu_m2"]],
            [out["cov_eu_m2"], out["cov_nu_m2"], out["cov_uu_m2"]],
        ]
    )
    if not np.any(cov):
        raise field_error(
            "cov_ee_m2",
            "Give the uncertainty of the coordinates; a position held fixed in an adjustment still has one.",
            "covariance_zero",
        )
    eig = np.linalg.eigvalsh(cov)
    if eig[0] < -_PSD_RELATIVE_TOLERANCE * eig[-1]:
        raise field_error(
            "cov_ee_m2",
            "The east/north/up covariance is not positive semi-definite (check the correlations).",
            "covariance_not_psd",
        )
    return out


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


def position_propose(*, actor, mark_code: str, data: dict) -> Position:
    """Record a proposed position of a mark (technician or manager).

    ``data``: ``frame_epsg`` (geographic 3D CRS), ``epoch_yr``, ``lat_deg``, ``lon_deg``,
    ``h_m`` (ellipsoidal), the east/north/up covariance in m² (``cov_ee_m2``,
    ``cov_nn_m2``, ``cov_uu_m2`` required; ``cov_en_m2``, ``cov_eu_m2``, ``cov_nu_m2``
    default 0), optional velocity (all three of ``vel_e_m_yr``, ``vel_n_m_yr``,
    ``vel_u_m_yr``, with optional sigmas) and ``source``, optional ``note``.
    """
    cleaned = _parse_position(data)
    with transaction.atomic():
        mark = access_mark_by_code(actor, mark_code, ability=Ability.RECORD, for_update=True)
        if mark.status == MarkStatus.DESTROYED:
            raise Conflict(
                f"Mark {mark.code} is recorded as destroyed; a destroyed mark gets no new positions.",
                code="mark_destroyed",
            )
        position = Position(mark=mark, created_by=actor, state=PositionState.PROPOSED, **cleaned)
        check_text_limits(position)
        position.full_clean()
        position.save(force_insert=True)
        audit_record(actor=actor, action="position_propose", obj=position, after=snapshot(position), mark=mark)
    return position


def position_publish(*, actor, position_id: int, note: str = "") -> Position:
    """Publish a proposed position (manager); supersede the earlier one of the same mark and frame.

    A suspect mark becomes active again (a new position answers the suspicion; ``services.suspect``);
    the change is recorded in the ``position_publish`` audit row (``mark_status`` and the suspicion
    before and after) and bumps the mark's version.
    """
    note = parse_note(note, required=False)
    with transaction.atomic():
        position = access_position_by_id(actor, position_id, ability=Ability.MANAGE, for_update=True)
        mark = Mark.objects.select_for_update().get(pk=position.mark_id)
        _require_state(position, PositionState.PROPOSED, action="published")
        if mark.status == MarkStatus.DESTROYED:
            raise Conflict(
                f"Mark {mark.code} is recorded as destroyed; its positions cannot be published.",
                code="mark_destroyed",
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
