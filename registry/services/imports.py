"""Importing marks from a CSV or GeoJSON file: all or nothing, and nothing silently overwritten.

``mark_import`` parses and validates the whole file first (every bad row is reported with its CSV line
or GeoJSON feature index and the reason). If anything is wrong, nothing is written. Otherwise every
mark goes through the same services as a manual edit (``mark_create`` / ``mark_update`` /
``mark_set_status``, ``position_propose_and_publish``), inside one transaction with a
savepoint per mark, so that a rule enforced only by a service (or by the database) is also reported for
every row it concerns; any such error rolls the whole import back.

A mark may take several rows, one per frame of its published positions (that is how the export
writes it): the first row creates or updates the mark, every row publishes its position.

A code that already exists is refused unless ``update=True``. Then each row is checked against the
registry first (optimistic concurrency, as for an edit on the page): the row's ``version`` must be the
mark's stored version, and a row with a position must carry the ``position_revision`` of that frame
stored now (the count of positions ever published there; 0 for a new frame). A row exported before
someone changed the mark, or published or withdrew a position in that frame, is refused with code
``stale_row`` ("file version N, registry version M, last changed by X at T") and the whole import
changes nothing. A row of an existing mark without those columns is refused (``version_required``)
unless ``overwrite=True``: then it is applied against whatever is stored now, and the import's audit
event lists those marks under ``unversioned``. ``overwrite`` never lets a *stale* version through:
to apply an old file on purpose, remove its version columns and import with ``overwrite``.

An accepted row's fields (only the columns or properties the file carries) are applied with
``mark_update``, its status with ``mark_set_status`` (status ``suspect`` with ``mark_make_suspect``, after
the row's positions, with the file's ``suspect_since`` and ``suspect_reason``; a suspect mark that the file
calls active becomes active only through a new position in the file, as on the pages), and a position that differs from the published
one in the same frame is proposed and published (the earlier one is superseded, never overwritten).
An identical position is left alone. On creation the file's version columns are not used (a new mark
starts at version 1).

Audit: the services write one event per change (``mark_create``, ``position_propose``,
``position_publish``, ...), and the import adds one ``marks_import`` summary event naming the file, its
SHA-256, whether ``overwrite`` was used and which marks were applied without a version check.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from collections.abc import Callable, Iterable, Iterator
from dataclasses import asdict, dataclass, field
from pathlib import PurePath
from typing import Any

from django.core.exceptions import ValidationError
from django.db import DatabaseError, transaction
from django.db.models import Count
from django.utils import timezone

from registry.errors import Conflict, InvalidInput, RegistryError
from registry.io.common import (
    EVER_PUBLISHED_STATES,
    POSITION_MODEL_FIELDS,
    REVISION_FIELD,
    VERSION_FIELD,
    MarkRecord,
    RowError,
    check_rows_per_mark,
)
from registry.io.marks_csv import parse_marks_csv
from registry.io.marks_geojson import parse_marks_geojson
from registry.models import AuditEvent, Mark, MarkStatus, Position, PositionState
from registry.roles import Ability
from registry.services.access import require_ability
from registry.services.import_bulk import batch_eligible, create_marks_in_batches
from registry.services.marks import VERSIONED_ACTIONS, mark_create, mark_set_status, mark_update
from registry.services.positions import position_propose_and_publish
from registry.services.suspect import mark_make_suspect

FORMATS = ("csv", "geojson")
#: Most row errors a refusal carries in its message details and shows on a page; the full list is
#: kept for download (``registry.services.import_runs``).
ERRORS_SHOWN = 200
#: Codes per ``IN (...)`` list (SQLite allows a limited number of parameters per statement).
IN_CHUNK = 900
_EXTENSIONS = {".csv": "csv", ".geojson": "geojson", ".json": "geojson"}


class ImportRejected(InvalidInput):
    """The file has bad rows; nothing was changed. ``errors`` lists every one."""

    code = "import_rejected"

    def __init__(self, errors: list[RowError], *, filename: str = ""):
        errors = sorted(errors, key=lambda e: e.index)
        rows = len({e.where for e in errors})
        name = f" {filename}" if filename else ""
        super().__init__(
            f"The import of{name} was refused: {len(errors):,} problem(s) in {rows:,} row(s). Nothing was changed.",
            details={
                "errors": [e.as_dict() for e in errors[:ERRORS_SHOWN]],
                "error_count": len(errors),
                "errors_shown": min(len(errors), ERRORS_SHOWN),
            },
        )
        #: Every problem, in file order (``details`` carries the first :data:`ERRORS_SHOWN`).
        self.errors = errors
        self.rows = rows

    @property
    def shown(self) -> list[RowError]:
        return self.errors[:ERRORS_SHOWN]


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
    overwrite: bool = False
    #: Codes of existing marks whose rows carried no version and were applied with ``overwrite``.
    unversioned: list[str] = field(default_factory=list)

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
    position_propose_and_publish(actor=actor, mark_code=code, data=dict(position), note="published by import")
    summary.positions_published += 1


def _same_position(stored: Position | None, wanted: dict[str, Any]) -> bool:
    if stored is None:
        return False
    return all(getattr(stored, name) == wanted.get(name) for name in POSITION_MODEL_FIELDS)


def _chunks(items: Iterable, size: int = IN_CHUNK) -> Iterator[list]:
    chunk = []
    for item in items:
        chunk.append(item)
        if len(chunk) == size:
            yield chunk
            chunk = []
    if chunk:
        yield chunk


def _existing_marks(codes: Iterable[str]) -> dict[str, Mark]:
    """Marks of these codes that are in the registry (one query per :data:`IN_CHUNK` codes)."""
    return {m.code: m for chunk in _chunks(sorted(set(codes))) for m in Mark.objects.filter(code__in=chunk)}


def _published_positions(mark_ids: list[int]) -> dict[tuple[int, int], Position]:
    """The published position of each (mark, frame) of these marks."""
    out = {}
    for chunk in _chunks(mark_ids):
        for p in Position.objects.filter(mark_id__in=chunk, state=PositionState.PUBLISHED):
            out[(p.mark_id, p.frame_epsg)] = p
    return out


def _lock_marks(mark_ids: list[int]) -> dict[int, Mark]:
    """Lock the rows of these marks for the import's transaction (in id order), and read them again."""
    out = {}
    for chunk in _chunks(sorted(mark_ids)):
        for m in Mark.objects.select_for_update().filter(pk__in=chunk).order_by("pk"):
            out[m.pk] = m
    return out


def _when(moment) -> str:
    return timezone.localtime(moment, dt.UTC).strftime("%Y-%m-%d %H:%M UTC") if moment else "an unknown time"


def _last_mark_change(mark: Mark) -> str:
    """ "by X at T" for the latest versioned change of ``mark``, from the audit trail."""
    event = (
        AuditEvent.objects.filter(mark=mark, action__in=("mark_create", *VERSIONED_ACTIONS))
        .select_related("actor")
        .order_by("-at", "-id")
        .first()
    )
    if event is None:
        return f"by an unknown user at {_when(mark.updated_at)}"
    who = event.actor.get_username() if event.actor else "an unknown user"
    return f"by {who} at {_when(event.at)}"


def _last_position_change(mark: Mark, frame_epsg: int) -> str:
    latest = (
        Position.objects.filter(mark=mark, frame_epsg=frame_epsg, state__in=EVER_PUBLISHED_STATES)
        .select_related("decided_by")
        .order_by("-decided_at", "-id")
        .first()
    )
    if latest is None:
        return "nothing published there now"
    verb = "withdrawn" if latest.state == PositionState.WITHDRAWN else "published"
    who = latest.decided_by.get_username() if latest.decided_by else "an unknown user"
    return f"last {verb} by {who} at {_when(latest.decided_at)}"


def _moved(in_file: int, in_registry: int) -> str:
    if in_file > in_registry:
        return "does not match this file (the file is ahead of the registry: made from another registry, or edited?)"
    return "was changed since this file was made"


def _concurrency_errors(records: list[MarkRecord], existing: dict[str, Mark], overwrite: bool) -> list[RowError]:
    """Stale or unversioned rows of existing marks (the ``--update`` check, before anything is written)."""
    mark_ids = sorted({existing[r.code].pk for r in records if r.code in existing})
    revisions = {}
    published = set()
    for chunk in _chunks(mark_ids):
        revisions.update(
            {
                (row["mark_id"], row["frame_epsg"]): row["n"]
                for row in Position.objects.filter(mark_id__in=chunk, state__in=EVER_PUBLISHED_STATES)
                .values("mark_id", "frame_epsg")
                .annotate(n=Count("id"))
                .order_by()
            }
        )
        published.update(
            Position.objects.filter(mark_id__in=chunk, state=PositionState.PUBLISHED).values_list(
                "mark_id", "frame_epsg"
            )
        )
    errors: list[RowError] = []

    def err(record, code, message, field_name):
        errors.append(RowError(record.where, record.index, code, message, field_name, record.code))

    for record in records:
        mark = existing.get(record.code)
        if mark is None:
            continue
        missing = [VERSION_FIELD] if record.version is None else []
        if record.position is not None and record.position_revision is None:
            missing.append(REVISION_FIELD)
        if missing and not overwrite:
            err(
                record,
                "version_required",
                f"mark {record.code} is in the registry and this row has no {' or '.join(missing)}; export the "
                "registry again and edit that file, or import with overwrite to apply the row whatever was "
                "changed since (the audit trail records it)",
                missing[0],
            )
        if record.version is not None and record.version != mark.version:
            err(
                record,
                "stale_row",
                f"mark {record.code} {_moved(record.version, mark.version)}: file version {record.version}, "
                f"registry version {mark.version}, last changed {_last_mark_change(mark)}",
                VERSION_FIELD,
            )
        if record.position is not None and record.position_revision is not None:
            frame = record.frame_epsg
            stored = revisions.get((mark.pk, frame), 0)
            withdrawn = stored and (mark.pk, frame) not in published
            if record.position_revision != stored or (withdrawn and record.position_revision > 0):
                now = f"registry revision {stored}" + (" (withdrawn, none published)" if withdrawn else "")
                err(
                    record,
                    "stale_row",
                    f"the position of {record.code} in EPSG:{frame} {_moved(record.position_revision, stored)}: file revision "
                    f"{record.position_revision}, {now}, {_last_position_change(mark, frame)}",
                    REVISION_FIELD,
                )
    return errors


def _apply_mark(
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
                f"registry version {mark.version}, last changed {_last_mark_change(mark)}",
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


def mark_import(
    *,
    actor,
    content: bytes | str,
    filename: str = "",
    fmt: str | None = None,
    update: bool = False,
    overwrite: bool = False,
    dry_run: bool = False,
    progress: Callable[[str, float], None] | None = None,
    batch: bool = True,
) -> ImportSummary:
    """Import marks and their published positions from CSV or GeoJSON content.

    Parameters
    ----------
    actor
        The user importing; must hold the manager role (ability MANAGE): an import publishes
        positions, which only a manager may do.
    content
        The file's bytes (UTF-8, with or without a byte-order mark) or text.
    filename
        Its name; the extension gives the format unless ``fmt`` is given.
    fmt
        ``"csv"`` or ``"geojson"``, overriding the extension.
    update
        Apply rows whose code exists, if their ``version``/``position_revision`` match the registry
        (see the module docstring); otherwise such rows are errors.
    overwrite
        With ``update`` only: also apply rows of existing marks that carry no version, against what is
        stored now (recorded in the import's audit event).
    dry_run
        Validate and apply inside a transaction, then roll it back: the summary says what would happen.
    progress
        Called with (what is being done, in words; fraction done 0..1) at each step and every few
        hundred rows before the writing starts (the writing itself is one transaction).
    batch
        Write new marks in batches (``registry.services.import_bulk``). False sends every mark through
        the services one at a time: the reference the batch path is tested and measured against.

    Returns
    -------
    ImportSummary

    Raises
    ------
    registry.errors.PermissionDeniedError
        The actor is not a manager.
    django.core.exceptions.ValidationError
        ``unknown_format``, ``overwrite_needs_update``.
    ImportRejected
        Any bad row (including ``stale_row`` and ``version_required``); ``errors`` lists them all.
        Nothing was changed.
    """
    require_ability(actor, Ability.MANAGE)
    if overwrite and not update:
        raise ValidationError(
            "overwrite applies to rows of existing marks, so it needs update.", code="overwrite_needs_update"
        )
    fmt = detect_format(filename, fmt)
    raw = content.encode("utf-8") if isinstance(content, str) else bytes(content)
    sha256 = hashlib.sha256(raw).hexdigest()
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ImportRejected(
            [RowError("file", 0, "not_utf8", f"the file is not UTF-8 text (byte {exc.start})")], filename=filename
        ) from None

    def step(words: str, fraction: float) -> None:
        if progress is not None:
            progress(words, fraction)

    step("reading the file", 0.0)
    parsed = parse_marks_csv(text) if fmt == "csv" else parse_marks_geojson(text)
    errors = parsed.errors + check_rows_per_mark(parsed.records)
    records = parsed.records
    step(f"checking {len(records):,} rows against the registry", 0.2)
    existing = _existing_marks(r.code for r in records)
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
    else:
        errors += _concurrency_errors(records, existing, overwrite)
    if not records and not errors:
        errors.append(RowError("file", 0, "no_rows", "the file holds no marks"))
    if errors:
        raise ImportRejected(errors, filename=filename)

    groups: dict[str, list[MarkRecord]] = {}
    for record in records:
        groups.setdefault(record.code, []).append(record)
    summary = ImportSummary(
        filename=filename, format=fmt, sha256=sha256, rows=len(records), dry_run=dry_run, overwrite=overwrite
    )
    summary.unversioned = [
        code for code, group in groups.items() if code in existing and any(r.version is None for r in group)
    ]
    note = f"import of {filename or 'a file'} (sha256 {sha256[:12]})"
    if summary.unversioned:
        note += f"; {len(summary.unversioned)} mark(s) applied without a version check (overwrite)"
    batched = [
        (code, group) for code, group in groups.items() if batch and code not in existing and batch_eligible(group)
    ]
    in_batch = {code for code, _ in batched}
    one_by_one = [(code, group) for code, group in groups.items() if code not in in_batch]
    total_rows = max(1, len(records))
    step(f"writing {len(groups):,} marks (all or nothing)", 0.3)
    try:
        with transaction.atomic():
            if batched:
                try:
                    with transaction.atomic():
                        created, published_n, batch_errors = create_marks_in_batches(
                            actor=actor,
                            groups=batched,
                            progress=lambda rows: step(
                                f"writing {len(groups):,} marks (all or nothing)", 0.3 + 0.6 * rows / total_rows
                            ),
                        )
                    errors.extend(batch_errors)
                    summary.created.extend(created)
                    summary.positions_published += published_n
                except DatabaseError:
                    # The database refused a batch: the services, one mark at a time, name the row.
                    one_by_one = batched + one_by_one
            ids = [existing[code].pk for code, _ in one_by_one if code in existing]
            locked = _lock_marks(ids)
            published = _published_positions(ids)
            for code, group in one_by_one:
                at = [group[0]]
                try:
                    with transaction.atomic():
                        mark = existing.get(code)
                        changed = _apply_mark(
                            actor,
                            group,
                            mark,
                            note,
                            summary,
                            at,
                            locked=locked.get(mark.pk) if mark else None,
                            published=published,
                        )
                    if code not in existing:
                        summary.created.append(code)
                    else:
                        (summary.updated if changed else summary.unchanged).append(code)
                except (ValidationError, RegistryError, DatabaseError) as exc:
                    errors.extend(_service_errors(exc, at[0]))
            if errors:
                raise ImportRejected(errors, filename=filename)
            order = {code: i for i, code in enumerate(groups)}
            summary.created.sort(key=order.__getitem__)
            counts = ("created", "updated", "unchanged")
            AuditEvent.objects.create(
                actor=actor if getattr(actor, "is_authenticated", False) else None,
                action="marks_import",
                object_type="import",
                object_id=sha256[:40],
                object_repr=(filename or "(unnamed file)")[:200],
                after={k: v for k, v in summary.as_dict().items() if k not in counts}
                | {k: len(getattr(summary, k)) for k in counts},
                note=note + (" — dry run, rolled back" if dry_run else ""),
            )
            if dry_run:
                raise _DryRunDone
    except _DryRunDone:
        pass
    return summary
