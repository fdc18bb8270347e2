"""Record an occupation from a RINEX observation file: its header pre-fills the session, the file is kept.

:func:`rinex_prefill` reads the header (``registry.io.rinex``) and checks it against the mark
without writing anything; :func:`occupation_from_rinex` records the occupation
(``registry.services.fieldwork.occupation_record``) and keeps the file as an attachment of kind
RINEX with its SHA-256, in one transaction, with an ``occupation_from_rinex`` audit row holding
what the header said. The page, the API and ``manage.py import_rinex`` all call these.

What a header may not say (the file is refused and nothing changes):

- it is not a RINEX observation file, is truncated, is Compact RINEX (Hatanaka), or its last
  observation comes before its first (``registry.io.rinex``);
- its approximate position lies more than ``REGISTRY["RINEX_MAX_OFFSET_M"]`` (default 100 m) from
  the mark's published position. A receiver's navigation solution is good to a few metres and the
  frames involved differ by about 2 m, so 100 m leaves room for a poor solution while catching a
  file recorded at another mark (demo marks in town are about 150 m apart at the closest);
- the same file (same SHA-256) is already attached to this mark.

Pre-filled fields: method static GNSS, start and end (header times converted to UTC), observer,
receiver (type, serial number, firmware), antenna (type, serial number), antenna height = the
header's ``ANTENNA: DELTA H`` taken as a vertical height mark → antenna reference point (its
meaning in every RINEX version), notes with the marker name and number, interval, satellite
systems and observation types. A non-zero east/north eccentricity is noted and warned about (the
occupation has no place for it; the session was not centred over the mark).

Hook for the movement check: an occupation from RINEX carries no result position (the header holds
no solution), so nothing here is compared with the published position; results come through
``position_propose`` (batch results, ``registry.services.occupation_batch``), where the check lives.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.files.base import ContentFile
from django.db import transaction

from registry.geodesy.conversions import geodetic_to_ecef
from registry.io.rinex import SYSTEM_NAMES, RinexError, RinexHeader, parse_rinex_header
from registry.models import Attachment, AttachmentKind, Mark, OccupationMethod, Position, PositionState
from registry.roles import Ability
from registry.services._input import field_error
from registry.services.access import access_mark_by_code
from registry.services.audit import audit_record
from registry.services.fieldwork import _max_bytes, attachment_add, occupation_record

DEFAULT_MAX_OFFSET_M = 100.0


def max_offset_m() -> float:
    return float(getattr(settings, "REGISTRY", {}).get("RINEX_MAX_OFFSET_M", DEFAULT_MAX_OFFSET_M))


@dataclass
class RinexPrefill:
    """What a RINEX header says, checked against the mark: the occupation fields and the warnings."""

    header: RinexHeader
    sha256: str
    size_bytes: int
    filename: str
    data: dict[str, Any]
    offset_m: float | None = None
    warnings: list[str] = field(default_factory=list)

    def as_dict(self) -> dict[str, Any]:
        data = dict(self.data)
        for key in ("start_utc", "end_utc"):
            if data.get(key) is not None:
                data[key] = data[key].isoformat().replace("+00:00", "Z")
        return {
            "file": self.filename,
            "sha256": self.sha256,
            "size_bytes": self.size_bytes,
            "header": self.header.as_dict(),
            "approx_offset_from_mark_m": None if self.offset_m is None else round(self.offset_m, 3),
            "occupation": data,
            "warnings": list(self.warnings),
        }


def _file_error(exc: RinexError) -> ValidationError:
    message = exc.message if exc.line is None else f"Line {exc.line}: {exc.message}"
    return field_error("file", message, f"rinex_{exc.code}", line=exc.line)


def _reference_position(mark: Mark) -> Position | None:
    return Position.objects.filter(mark=mark, state=PositionState.PUBLISHED).order_by("-decided_at", "-id").first()


def _notes(header: RinexHeader, filename: str) -> str:
    parts = [f"From the RINEX {header.version} header of {filename}."]
    if header.marker_name or header.marker_number:
        parts.append(f"Marker name {header.marker_name or '(none)'}, number {header.marker_number or '(none)'}.")
    if header.interval_s is not None:
        parts.append(f"Interval {header.interval_s:g} s.")
    systems = header.systems_text()
    if systems:
        parts.append(f"Systems: {systems}.")
    for letter, types in header.obs_types.items():
        parts.append(f"{SYSTEM_NAMES.get(letter, letter)} observation types: {' '.join(types)}.")
    if header.approx_xyz_m is not None:
        x, y, z = header.approx_xyz_m
        parts.append(f"Approximate position X {x:.4f} m, Y {y:.4f} m, Z {z:.4f} m.")
    if header.antenna_delta_e_m or header.antenna_delta_n_m:
        parts.append(
            f"Antenna eccentricity east {header.antenna_delta_e_m or 0:.4f} m, north {header.antenna_delta_n_m or 0:.4f} m."
        )
    return " ".join(parts)


def _join(*parts_with_labels: tuple[str, str]) -> str:
    main, *rest = parts_with_labels
    text = main[1]
    extra = [f"{label} {value}" for label, value in rest if value]
    if extra:
        text = f"{text} ({', '.join(extra)})" if text else ", ".join(extra)
    return text[:120]


def rinex_prefill(*, mark: Mark, content: bytes, filename: str) -> RinexPrefill:
    """Read and check a RINEX file for ``mark``; no write. A coded ``ValidationError`` on field ``file``."""
    import hashlib

    if not isinstance(content, bytes | bytearray) or not content:
        raise field_error("file", "The file is empty.", "empty_file")
    if len(content) > _max_bytes():
        raise field_error("file", "The file is larger than %(limit)d bytes.", "file_too_large", limit=_max_bytes())
    try:
        header = parse_rinex_header(bytes(content))
    except RinexError as exc:
        raise _file_error(exc) from None
    sha256 = hashlib.sha256(content).hexdigest()
    warnings: list[str] = []
    offset_m = None
    reference = _reference_position(mark)
    if header.approx_xyz_m is None:
        warnings.append("The header gives no approximate position; it could not be checked against the mark.")
    elif reference is None:
        warnings.append("The mark has no published position; the header's approximate position was not checked.")
    else:
        x, y, z = (float(v) for v in geodetic_to_ecef(reference.lat_deg, reference.lon_deg, reference.h_m))
        ax, ay, az = header.approx_xyz_m
        offset_m = math.sqrt((ax - x) ** 2 + (ay - y) ** 2 + (az - z) ** 2)
        if offset_m > max_offset_m():
            raise field_error(
                "file",
                "The header's approximate position is %(offset).0f m from the mark's published position "
                "(more than %(limit).0f m): this file does not look like a session on %(mark)s.",
                "rinex_far_from_mark",
                offset=offset_m,
                limit=max_offset_m(),
                mark=mark.code,
            )
    if header.marker_name and header.marker_name.upper() not in (mark.code.upper(), (mark.name or "").upper()):
        warnings.append(f"The header's marker name {header.marker_name!r} is not this mark's code {mark.code}.")
    if header.last_obs_utc is None:
        warnings.append("The header has no time of last observation; enter the end of the session.")
    if header.antenna_delta_e_m or header.antenna_delta_n_m:
        warnings.append(
            "The antenna was set off the mark (east/north eccentricity in the header); reduce the results "
            "to the mark before comparing them."
        )
    if Attachment.objects.filter(mark=mark, sha256=sha256).exists():
        raise field_error(
            "file",
            "This file (same SHA-256) is already attached to %(mark)s.",
            "rinex_already_attached",
            mark=mark.code,
        )
    data: dict[str, Any] = {
        "method": OccupationMethod.STATIC_GNSS,
        "start_utc": header.first_obs_utc,
        "end_utc": header.last_obs_utc,
        "observer": header.observer[:120],
        "receiver": _join(
            ("", header.receiver_type), ("s/n", header.receiver_number), ("firmware", header.receiver_version)
        ),
        "antenna": _join(("", header.antenna_type), ("s/n", header.antenna_number)),
        "antenna_height_measured_m": header.antenna_delta_h_m,
        "antenna_height_kind": "vertical",
        "notes": _notes(header, filename),
    }
    return RinexPrefill(
        header=header,
        sha256=sha256,
        size_bytes=len(content),
        filename=filename,
        data=data,
        offset_m=offset_m,
        warnings=warnings,
    )


class _DryRun(Exception):
    pass


def occupation_from_rinex(
    *,
    actor,
    mark_code: str,
    content: bytes,
    filename: str,
    data: dict[str, Any] | None = None,
    dry_run: bool = False,
) -> tuple[Any, RinexPrefill]:
    """Record an occupation pre-filled from a RINEX header and attach the file (technician or manager).

    ``data`` overrides pre-filled occupation fields (what a person corrected on the form; empty
    values are ignored). Returns ``(occupation, prefill)``; with ``dry_run`` everything is checked,
    the occupation is validated and rolled back, no file is stored, and ``occupation`` is ``None``.
    """
    mark = access_mark_by_code(actor, mark_code, ability=Ability.RECORD)
    prefill = rinex_prefill(mark=mark, content=content, filename=filename)
    values = {k: v for k, v in prefill.data.items() if v is not None and v != ""}
    for key, value in (data or {}).items():
        if value is not None and value != "":
            values[key] = value
    if values.get("end_utc") is None:
        raise field_error("end_utc", "The header has no time of last observation; give the end.", "required")
    occupation = None
    try:
        with transaction.atomic():
            occupation = occupation_record(actor=actor, mark_code=mark.code, data=values)
            if dry_run:
                raise _DryRun
            attachment = attachment_add(
                actor=actor,
                mark_code=mark.code,
                file=ContentFile(bytes(content), name=filename or "session.rnx"),
                kind=AttachmentKind.RINEX,
                occupation_id=occupation.pk,
                caption=f"RINEX {prefill.header.version} observation file",
            )
            try:
                audit_record(
                    actor=actor,
                    action="occupation_from_rinex",
                    obj=occupation,
                    after={
                        "attachment_id": attachment.pk,
                        "sha256": prefill.sha256,
                        "header": prefill.header.as_dict(),
                        "approx_offset_from_mark_m": prefill.offset_m,
                        "warnings": prefill.warnings,
                    },
                    mark=mark,
                )
            except BaseException:
                attachment.file.storage.delete(attachment.file.name)
                raise
    except _DryRun:
        occupation = None
    return occupation, prefill
