"""Writes of fieldwork: visits (what a crew found at a mark), occupations and attached files.

Technicians and managers (ability RECORD) record these. Each function validates its
input (coded ``ValidationError``), runs in one transaction and writes an audit row.

Antenna height of an occupation: when the height was measured vertically to the
antenna reference point (ARP), that value is stored as the ARP height too. When it
was measured as a slant to the antenna's slant-measure point, the vertical ARP height
is h_ARP = √(s² − r²) + Δh (formula as documented for a GNSS data-preparation tool's slant
option, secondary transcription), computed by
``registry.geodesy.antenna.slant_to_vertical_arp_m`` when the antenna radius
``antenna_radius_m`` (r) and offset ``arp_offset_m`` (Δh, negative when the ARP is below
the slant-measure plane) are given. A slant without them is stored as measured and its
ARP height stays empty (never silently treated as vertical); r and Δh are kept in the
audit row, since the occupation has no columns for them.

Attachments are stored through Django's default storage under a path built from the
mark code and the file's SHA-256, which is computed while streaming the upload.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import os
from typing import Any

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.files import File
from django.db import transaction
from django.utils import timezone
from django.utils.text import get_valid_filename

from registry.errors import Conflict
from registry.geodesy.accuracy import ComputationInputError
from registry.geodesy.antenna import slant_to_vertical_arp_m
from registry.models import (
    AntennaHeightKind,
    Attachment,
    AttachmentKind,
    Finding,
    Occupation,
    OccupationMethod,
    Position,
    Visit,
)
from registry.roles import Ability
from registry.services._input import (
    check_keys,
    field_error,
    merge_errors,
    parse_aware_datetime,
    parse_choice,
    parse_date_value,
    parse_float,
    parse_int,
    parse_text,
)
from registry.services.access import access_mark_by_code
from registry.services.audit import audit_record, snapshot
from registry.services.limits import check_text_limits
from registry.services.suspect import visit_suspicion
from registry.services.usability import assess
from registry.vocabulary import OLD_VISIT_FIELDS, new_finding, rename_old_keys

VISIT_FIELDS = ("visited_on", "finding", "visitor", "notes")
OCCUPATION_FIELDS = (
    "method",
    "start_utc",
    "end_utc",
    "observer",
    "receiver",
    "antenna",
    "antenna_height_measured_m",
    "antenna_height_kind",
    "antenna_radius_m",
    "arp_offset_m",
    "result_position_id",
    "notes",
)
# Antenna heights outside this range are refused (same as the model's CheckConstraint).
ANTENNA_HEIGHT_MAX_M = 10.0
# A session may start at most this far in the future (clock differences between devices).
FUTURE_SLACK = _dt.timedelta(minutes=10)
# Default cap on one attachment; settings.REGISTRY["ATTACHMENT_MAX_BYTES"] overrides it.
DEFAULT_ATTACHMENT_MAX_BYTES = 512 * 1024 * 1024
_HASH_CHUNK_BYTES = 1024 * 1024


def _collect(*calls) -> list[Any]:
    """Run parser calls, collecting every field error before raising them together."""
    values, errors = [], []
    for fn, args, kwargs in calls:
        try:
            values.append(fn(*args, **kwargs))
        except ValidationError as exc:
            errors.append(exc)
            values.append(None)
    if errors:
        raise merge_errors(*errors)
    return values


def visit_record(*, actor, mark_code: str, data: dict) -> Visit:
    """Record a visit: ``visited_on`` (date), ``finding``, optional ``visitor``, ``notes``.

    A visit that found an active mark ``disturbed`` or ``searched_not_found`` makes it suspect in the
    same transaction when it is dated on or after the publication of the mark's newest published
    position (``registry.services.suspect``). A visit that found it destroyed does not change the
    mark's status; the control manager decides that (mark_set_status).

    The earlier field name ``condition`` and values ``good``, ``poor``, ``not_found`` are accepted for
    one more release (``registry.vocabulary``).
    """
    if isinstance(data, dict):
        data = rename_old_keys(data, OLD_VISIT_FIELDS)
        if "finding" in data:
            data["finding"] = new_finding(data["finding"])
    check_keys(data, VISIT_FIELDS)
    visited_on, finding, visitor, notes = _collect(
        (parse_date_value, (data, "visited_on"), {"required": True}),
        (parse_choice, (data, "finding", Finding), {"required": True}),
        (parse_text, (data, "visitor"), {"max_length": 120}),
        (parse_text, (data, "notes"), {}),
    )
    if visited_on > timezone.now().date():
        raise field_error("visited_on", "A visit cannot be dated in the future.", "date_in_future")
    with transaction.atomic():
        mark = access_mark_by_code(actor, mark_code, ability=Ability.RECORD, for_update=True)
        visit = Visit(mark=mark, visited_on=visited_on, finding=finding, visitor=visitor, notes=notes, created_by=actor)
        check_text_limits(visit)
        visit.full_clean()
        visit.save(force_insert=True)
        audit_record(actor=actor, action="visit_record", obj=visit, after=snapshot(visit), mark=mark)
        visit_suspicion(visit=visit, mark=mark, actor=actor)
    return visit


def _arp_height_m(kind: str, measured_m: float | None, radius_m: float | None, offset_m: float | None) -> float | None:
    """The vertical mark → ARP height, or ``None`` when a slant comes without the antenna's radius and offset."""
    if measured_m is None:
        return None
    if kind == AntennaHeightKind.VERTICAL:
        return measured_m
    if radius_m is None or offset_m is None:
        # stored as measured; reduced once the antenna's radius and offset are known (the input rules
        # refuse one without the other)
        return None
    try:
        return float(slant_to_vertical_arp_m(slant_m=measured_m, radius_m=radius_m, arp_offset_m=offset_m))
    except ComputationInputError as exc:
        raise field_error("antenna_height_measured_m", exc.message, exc.code) from None


def occupation_record(*, actor, mark_code: str, data: dict) -> Occupation:
    """Record one session on a mark.

    ``data``: ``method``, ``start_utc`` and ``end_utc`` (aware datetimes or ISO 8601
    text with a zone), optional ``observer``, ``receiver``, ``antenna``,
    ``antenna_height_measured_m``, ``antenna_height_kind`` (``vertical`` or ``slant``;
    default vertical), for a slant ``antenna_radius_m`` and ``arp_offset_m``, optional
    ``result_position_id`` (a position of the same mark) and ``notes``.
    """
    check_keys(data, OCCUPATION_FIELDS)
    (method, start, end, observer, receiver, antenna, measured, kind, radius, offset, result_id, notes) = _collect(
        (parse_choice, (data, "method", OccupationMethod), {"required": True}),
        (parse_aware_datetime, (data, "start_utc"), {"required": True}),
        (parse_aware_datetime, (data, "end_utc"), {"required": True}),
        (parse_text, (data, "observer"), {"max_length": 120}),
        (parse_text, (data, "receiver"), {"max_length": 120}),
        (parse_text, (data, "antenna"), {"max_length": 120}),
        (parse_float, (data, "antenna_height_measured_m"), {}),
        (parse_choice, (data, "antenna_height_kind", AntennaHeightKind), {"default": AntennaHeightKind.VERTICAL}),
        (parse_float, (data, "antenna_radius_m"), {}),
        (parse_float, (data, "arp_offset_m"), {}),
        (parse_int, (data, "result_position_id"), {}),
        (parse_text, (data, "notes"), {}),
    )
    errors = []
    if end < start:
        errors.append(field_error("end_utc", "The session ends before it starts.", "end_before_start"))
    if start > timezone.now() + FUTURE_SLACK:
        errors.append(field_error("start_utc", "A session cannot start in the future.", "in_future"))
    if measured is not None and not 0.0 <= measured <= ANTENNA_HEIGHT_MAX_M:
        errors.append(
            field_error(
                "antenna_height_measured_m",
                "An antenna height is between 0 and %(limit)s m.",
                "antenna_height_out_of_range",
                limit=ANTENNA_HEIGHT_MAX_M,
            )
        )
    if radius is not None and radius <= 0:
        errors.append(field_error("antenna_radius_m", "The antenna radius must be positive.", "invalid_radius"))
    if kind == AntennaHeightKind.SLANT and measured is not None and (radius is None) != (offset is None):
        errors.append(
            field_error(
                "antenna_radius_m",
                "Give both the antenna radius and the ARP offset to reduce a slant height (or neither).",
                "slant_geometry_incomplete",
            )
        )
    if kind == AntennaHeightKind.VERTICAL and (radius is not None or offset is not None):
        errors.append(
            field_error(
                "antenna_radius_m", "Radius and offset apply to a slant height only.", "slant_fields_for_vertical"
            )
        )
    if measured is not None and radius is not None and kind == AntennaHeightKind.SLANT and measured < radius:
        errors.append(
            field_error(
                "antenna_height_measured_m",
                "A slant height cannot be shorter than the antenna radius.",
                "slant_shorter_than_radius",
            )
        )
    if errors:
        raise merge_errors(*errors)
    arp = _arp_height_m(kind, measured, radius, offset)
    if arp is not None and not 0.0 <= arp <= ANTENNA_HEIGHT_MAX_M:
        raise field_error("arp_offset_m", "The reduced ARP height is out of range.", "antenna_height_out_of_range")

    with transaction.atomic():
        mark = access_mark_by_code(actor, mark_code, ability=Ability.RECORD)
        if not assess(mark.status).occupation_allowed:
            raise Conflict(
                f"Mark {mark.code} is recorded as destroyed; a destroyed mark takes no occupations.",
                code="mark_destroyed",
            )
        result_position = None
        if result_id is not None:
            result_position = Position.objects.filter(pk=result_id, mark=mark).first()
            if result_position is None:
                raise field_error(
                    "result_position_id", "No position with this id belongs to this mark.", "position_other_mark"
                )
        occupation = Occupation(
            mark=mark,
            method=method,
            start_utc=start,
            end_utc=end,
            observer=observer,
            receiver=receiver,
            antenna=antenna,
            antenna_height_measured_m=measured,
            antenna_height_kind=kind,
            antenna_height_arp_m=arp,
            result_position=result_position,
            notes=notes,
            created_by=actor,
        )
        check_text_limits(occupation)
        # The ranges of the model's CheckConstraints are checked above with their own codes and enforced by
        # the database; Django's Python-side check costs one query per constraint (batch imports), skipped, as
        # are the queries re-reading the mark, user and result position just fetched (foreign keys).
        occupation.full_clean(exclude=("mark", "created_by", "result_position"), validate_constraints=False)
        occupation.save(force_insert=True)
        after = snapshot(occupation)
        if kind == AntennaHeightKind.SLANT:
            after.update({"antenna_radius_m": radius, "arp_offset_m": offset})
        audit_record(actor=actor, action="occupation_record", obj=occupation, after=after, mark=mark)
    return occupation


def _max_bytes() -> int:
    return int(getattr(settings, "REGISTRY", {}).get("ATTACHMENT_MAX_BYTES", DEFAULT_ATTACHMENT_MAX_BYTES))


def _hash_stream(file) -> tuple[str, int]:
    digest = hashlib.sha256()
    size = 0
    if hasattr(file, "seek"):
        file.seek(0)
    for chunk in (
        file.chunks(_HASH_CHUNK_BYTES) if hasattr(file, "chunks") else iter(lambda: file.read(_HASH_CHUNK_BYTES), b"")
    ):
        if isinstance(chunk, str):
            raise field_error("file", "Attach the file in binary mode.", "invalid_file")
        digest.update(chunk)
        size += len(chunk)
    if hasattr(file, "seek"):
        file.seek(0)
    return digest.hexdigest(), size


def attachment_add(
    *,
    actor,
    mark_code: str,
    file,
    kind: str,
    occupation_id: int | None = None,
    visit_id: int | None = None,
    caption: str = "",
) -> Attachment:
    """Attach a file (photo, RINEX, sketch, other) to a mark, optionally to one of its occupations or visits.

    The SHA-256 and size are computed while streaming; empty files, files over the
    size cap and unknown kinds are refused. If the database write fails, the stored
    file is removed again.
    """
    errors = []
    if kind not in AttachmentKind.values:
        errors.append(
            field_error(
                "kind",
                "%(value)r is not one of: %(choices)s.",
                "invalid_choice",
                value=kind,
                choices=", ".join(AttachmentKind.values),
            )
        )
    if not isinstance(caption, str) or len(caption.strip()) > 200 or "\x00" in caption:
        errors.append(field_error("caption", "A caption is text of at most 200 characters.", "invalid_caption"))
    if file is None or not (hasattr(file, "chunks") or hasattr(file, "read")):
        errors.append(field_error("file", "Attach a file.", "required"))
    if errors:
        raise merge_errors(*errors)
    if not isinstance(file, File):
        file = File(file, name=getattr(file, "name", None))
    original = os.path.basename(str(file.name or "").replace("\x00", "")) or "upload.bin"
    sha256, size = _hash_stream(file)
    if size == 0:
        raise field_error("file", "The file is empty.", "empty_file")
    if size > _max_bytes():
        raise field_error("file", "The file is larger than %(limit)d bytes.", "file_too_large", limit=_max_bytes())

    with transaction.atomic():
        mark = access_mark_by_code(actor, mark_code, ability=Ability.RECORD)
        occupation = visit = None
        id_values = _collect(
            (parse_int, ({"occupation_id": occupation_id}, "occupation_id"), {}),
            (parse_int, ({"visit_id": visit_id}, "visit_id"), {}),
        )
        if id_values[0] is not None:
            occupation = Occupation.objects.filter(pk=id_values[0], mark=mark).first()
            if occupation is None:
                raise field_error(
                    "occupation_id", "No occupation with this id belongs to this mark.", "occupation_other_mark"
                )
        if id_values[1] is not None:
            visit = Visit.objects.filter(pk=id_values[1], mark=mark).first()
            if visit is None:
                raise field_error("visit_id", "No visit with this id belongs to this mark.", "visit_other_mark")
        attachment = Attachment(
            mark=mark,
            occupation=occupation,
            visit=visit,
            kind=kind,
            original_name=original[:255],
            sha256=sha256,
            size_bytes=size,
            caption=caption.strip(),
            uploaded_by=actor,
        )
        stored_name = get_valid_filename(original) or "upload.bin"
        attachment.file.save(stored_name, file, save=False)
        try:
            attachment.full_clean()
            attachment.save(force_insert=True)
            audit_record(actor=actor, action="attachment_add", obj=attachment, after=snapshot(attachment), mark=mark)
        except BaseException:
            attachment.file.storage.delete(attachment.file.name)
            raise
    return attachment
