"""Importing marks from a CSV or GeoJSON file: all or nothing, and nothing silently overwritten.

``mark_import`` parses and validates the whole file first (every bad row is reported with its CSV line
or GeoJSON feature index and the reason). If anything is wrong, nothing is written. Otherwise new marks
(active or retired) are written in batches with the checks, movement checks and audit rows the services
would write (``import_bulk``; a test compares the two), and every other mark goes through the same
services as a manual edit (``mark_create`` / ``mark_update`` /
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

The work is split by concept: this module is the entry point (:func:`mark_import`);
``import_report`` holds the refusal, the summary and the format; ``import_checks`` the reads before
writing (existing codes, the ``update`` concurrency check); ``import_bulk`` the batch path for new marks
(with ``rows_insert``); ``import_apply`` the path through the services one mark at a time.

Audit: the services write one event per change (``mark_create``, ``position_propose``,
``position_publish``, ...), and the import adds one ``marks_import`` summary event naming the file, its
SHA-256, whether ``overwrite`` was used and which marks were applied without a version check.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable

from django.core.exceptions import ValidationError
from django.db import DatabaseError, transaction

from registry.errors import RegistryError
from registry.io.common import MarkRecord, RowError, check_rows_per_mark
from registry.io.marks_csv import parse_marks_csv
from registry.io.marks_geojson import parse_marks_geojson
from registry.models import AuditEvent
from registry.roles import Ability
from registry.services.access import require_ability
from registry.services.import_apply import apply_mark, nothing_to_apply
from registry.services.import_bulk import batch_eligible, create_marks_in_batches
from registry.services.import_checks import concurrency_errors, existing_marks, lock_marks, published_positions
from registry.services.import_report import (
    ERRORS_SHOWN,
    FORMATS,
    ImportRejected,
    ImportSummary,
    detect_format,
    service_errors,
)

__all__ = ["ERRORS_SHOWN", "FORMATS", "ImportRejected", "ImportSummary", "detect_format", "mark_import"]


class _DryRunDone(Exception):
    """Raised inside the transaction to roll a successful dry run back."""


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
    existing = existing_marks(r.code for r in records)
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
        errors += concurrency_errors(records, existing, overwrite)
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
            locked = lock_marks(ids)
            published = published_positions(ids)
            for code, group in one_by_one:
                at = [group[0]]
                if code in existing and nothing_to_apply(group, locked.get(existing[code].pk), published):
                    summary.unchanged.append(code)  # no statement, no savepoint: what apply_mark would find
                    continue
                try:
                    with transaction.atomic():
                        mark = existing.get(code)
                        changed = apply_mark(
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
                    errors.extend(service_errors(exc, at[0]))
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
