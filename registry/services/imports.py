"""Importing marks from a CSV or GeoJSON file: all or nothing.

``mark_import`` parses and validates the whole file first (every bad row is reported with its CSV line
or GeoJSON feature index and the reason). If anything is wrong, nothing is written. Otherwise every row
goes through the same services as a manual edit (``mark_create`` / ``mark_update`` /
``mark_set_status``, ``position_propose`` + ``position_publish``), inside one transaction with a
savepoint per row, so that a rule enforced only by a service (or by the database) is also reported for
every row it concerns; any such error rolls the whole import back.

A code that already exists is refused unless ``update=True``; then the row's fields (only the columns
or properties the file carries) are applied with ``mark_update`` against the mark's current version,
its status with ``mark_set_status``, and a position that differs from the published one in the same
frame is proposed and published (the earlier one is superseded, never overwritten). An identical
position is left alone.

Audit: the services write one event per change (``mark_create``, ``position_propose``,
``position_publish``, ...), and the import adds one ``marks_import`` summary event naming the file and
its SHA-256.
"""

from __future__ import annotations

import hashlib
from dataclasses import asdict, dataclass, field
from pathlib import PurePath
from typing import Any

from django.core.exceptions import ValidationError
from django.db import DatabaseError, transaction

from registry.errors import InvalidInput, RegistryError
from registry.io.common import POSITION_MODEL_FIELDS, MarkRecord, RowError, find_duplicate_codes
from registry.io.marks_csv import parse_marks_csv
from registry.io.marks_geojson import parse_marks_geojson
from registry.models import AuditEvent, Mark, MarkStatus, Position, PositionState
from registry.roles import Ability
from registry.services.access import require_ability
from registry.services.marks import mark_create, mark_set_status, mark_update
from registry.services.positions import position_propose, position_publish

FORMATS = ("csv", "geojson")
_EXTENSIONS = {".csv": "csv", ".geojson": "geojson", ".json": "geojson"}


class ImportRejected(InvalidInput):
    """The file has bad rows; nothing was changed. ``errors`` lists every one."""

    code = "import_rejected"

    def __init__(self, errors: list[RowError], *, filename: str = ""):
        errors = sorted(errors, key=lambda e: e.index)
        rows = len({e.where for e in errors})
        name = f" {filename}" if filename else ""
        super().__init__(
            f"The import of{name} was refused: {len(errors)} problem(s) in {rows} row(s). Nothing was changed.",
            details={"errors": [e.as_dict() for e in errors]},
        )
        self.errors = errors


@dataclass
class ImportSummary:
    filename: str
    format: str
    sha256: str
    rows: int
    created: list[str] = field(default_factory=list)
    updated: list[str] = field(default_factory=list)
    unchanged: list[str] = field(default_factory=list)
    positions_published: int = 0
    dry_run: bool = False

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


class _DryRunDone(Exception):
    """Raised inside the transaction to roll a successful dry run back."""


def detect_format(filename: str, fmt: str | None = None) -> str:
    """``csv`` or ``geojson`` from an explicit choice, else from the file name's extension."""
    if fmt:
        fmt = fmt.strip().lower()
        if fmt not in FORMATS:
            raise ValidationError(
                "Unknown format %(value)r; use csv or geojson.", code="unknown_format", params={"value": fmt}
            )
        return fmt
    suffix = PurePath(filename or "").suffix.lower()
    if suffix in _EXTENSIONS:
        return _EXTENSIONS[suffix]
    raise ValidationError(
        "Cannot tell the format from the file name %(name)r; name it .csv or .geojson, or give the format.",
        code="unknown_format",
        params={"name": filename},
    )


def _service_errors(exc: Exception, record: MarkRecord) -> list[RowError]:
    """Row errors from what a service raised."""
    out = []
    if isinstance(exc, ValidationError):
        items = exc.error_dict.items() if hasattr(exc, "error_dict") else [("", exc.error_list)]
        for name, errors in items:
            for err in errors:
                out.append(
                    RowError(
                        record.where,
                        record.index,
                        err.code or "invalid",
                        " ".join(err.messages),
                        "" if name == "__all__" else name,
                        record.code,
                    )
                )
    elif isinstance(exc, RegistryError):
        out.append(RowError(record.where, record.index, exc.code, exc.message, "", record.code))
    else:  # a database constraint
        out.append(RowError(record.where, record.index, "database_refused", str(exc).strip(), "", record.code))
    return out


def _publish(actor, code: str, position: dict[str, Any], summary: ImportSummary) -> None:
    proposed = position_propose(actor=actor, mark_code=code, data=dict(position))
    position_publish(actor=actor, position_id=proposed.pk, note="published by import")
    summary.positions_published += 1


def _same_position(stored: Position | None, wanted: dict[str, Any]) -> bool:
    if stored is None:
        return False
    return all(getattr(stored, name) == wanted.get(name) for name in POSITION_MODEL_FIELDS)


def _apply_new(actor, record: MarkRecord, note: str, summary: ImportSummary) -> None:
    data = dict(record.mark)
    status = data.get("status", MarkStatus.ACTIVE)
    # A destroyed mark takes no new positions: create it active, publish, then record the status.
    late_status = status == MarkStatus.DESTROYED and record.position is not None
    if late_status:
        data["status"] = MarkStatus.ACTIVE
    mark_create(actor=actor, data=data)
    if record.position is not None:
        _publish(actor, record.code, record.position, summary)
    if late_status:
        version = Mark.objects.values_list("version", flat=True).get(code=record.code)
        mark_set_status(actor=actor, code=record.code, status=status, expected_version=version, note=note)


def _apply_update(actor, record: MarkRecord, mark: Mark, note: str, summary: ImportSummary) -> bool:
    """Apply a row to an existing mark; True when anything changed."""
    changed = False
    changes = {k: v for k, v in record.mark.items() if k not in ("code", "status") and getattr(mark, k) != v}
    if changes:
        mark = mark_update(actor=actor, code=mark.code, expected_version=mark.version, changes=changes)
        changed = True
    status = record.mark.get("status")
    if status is not None and status != mark.status and status != MarkStatus.DESTROYED:
        mark = mark_set_status(actor=actor, code=mark.code, status=status, expected_version=mark.version, note=note)
        changed = True
    if record.position is not None:
        stored = Position.objects.filter(
            mark=mark, frame_epsg=record.position["frame_epsg"], state=PositionState.PUBLISHED
        ).first()
        if not _same_position(stored, record.position):
            _publish(actor, mark.code, record.position, summary)
            changed = True
    if status == MarkStatus.DESTROYED and mark.status != MarkStatus.DESTROYED:
        mark.refresh_from_db()
        mark_set_status(actor=actor, code=mark.code, status=status, expected_version=mark.version, note=note)
        changed = True
    return changed


def mark_import(
    *,
    actor,
    content: bytes | str,
    filename: str = "",
    fmt: str | None = None,
    update: bool = False,
    dry_run: bool = False,
) -> ImportSummary:
    """Import marks (and one published position each, optionally) from CSV or GeoJSON content.

    Parameters
    ----------
    actor
        The user importing; must hold the manager role (ability MANAGE).
    content
        The file's bytes (UTF-8, with or without a byte-order mark) or text.
    filename
        Its name; the extension gives the format unless ``fmt`` is given.
    fmt
        ``"csv"`` or ``"geojson"``, overriding the extension.
    update
        Apply rows whose code exists (see the module docstring); otherwise such rows are errors.
    dry_run
        Validate and apply inside a transaction, then roll it back: the summary says what would happen.

    Returns
    -------
    ImportSummary

    Raises
    ------
    registry.errors.PermissionDeniedError
        The actor is not a manager.
    django.core.exceptions.ValidationError
        ``unknown_format``.
    ImportRejected
        Any bad row; ``errors`` lists them all. Nothing was changed.
    """
    require_ability(actor, Ability.MANAGE)
    fmt = detect_format(filename, fmt)
    raw = content.encode("utf-8") if isinstance(content, str) else bytes(content)
    sha256 = hashlib.sha256(raw).hexdigest()
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ImportRejected(
            [RowError("file", 0, "not_utf8", f"the file is not UTF-8 text (byte {exc.start})")], filename=filename
        ) from None

    parsed = parse_marks_csv(text) if fmt == "csv" else parse_marks_geojson(text)
    errors = parsed.errors + find_duplicate_codes(parsed.records)
    records = parsed.records
    existing = {m.code: m for m in Mark.objects.filter(code__in=[r.code for r in records])}
    if not update:
        errors += [
            RowError(
                r.where,
                r.index,
                "code_exists",
                f"mark {r.code} is already in the registry; import with update to apply changes to it",
                "code",
                r.code,
            )
            for r in records
            if r.code in existing
        ]
    if not records and not errors:
        errors.append(RowError("file", 0, "no_rows", "the file holds no marks"))
    if errors:
        raise ImportRejected(errors, filename=filename)

    summary = ImportSummary(filename=filename, format=fmt, sha256=sha256, rows=len(records), dry_run=dry_run)
    note = f"import of {filename or 'a file'} (sha256 {sha256[:12]})"
    try:
        with transaction.atomic():
            for record in records:
                try:
                    with transaction.atomic():
                        if record.code in existing:
                            changed = _apply_update(actor, record, existing[record.code], note, summary)
                            (summary.updated if changed else summary.unchanged).append(record.code)
                        else:
                            _apply_new(actor, record, note, summary)
                            summary.created.append(record.code)
                except (ValidationError, RegistryError, DatabaseError) as exc:
                    errors.extend(_service_errors(exc, record))
            if errors:
                raise ImportRejected(errors, filename=filename)
            AuditEvent.objects.create(
                actor=actor if getattr(actor, "is_authenticated", False) else None,
                action="marks_import",
                object_type="import",
                object_id=sha256[:40],
                object_repr=(filename or "(unnamed file)")[:200],
                after={k: v for k, v in summary.as_dict().items() if k not in ("created", "updated", "unchanged")}
                | {
                    "created": len(summary.created),
                    "updated": len(summary.updated),
                    "unchanged": len(summary.unchanged),
                },
                note=note + (" — dry run, rolled back" if dry_run else ""),
            )
            if dry_run:
                raise _DryRunDone
    except _DryRunDone:
        pass
    return summary
