"""Record a batch of occupation results from a CSV file: all or nothing, every bad row listed.

The file's columns are in ``registry.io.occupations_csv`` (and the README). Each row goes through
the same services as one typed on a page: its result, if any, through
``registry.services.positions.position_propose`` (a proposed position of the mark, source the file),
then the occupation through ``registry.services.fieldwork.occupation_record`` with that position as
its result. So every rule of those services applies to every row, and each row gets the same audit
rows (``position_propose``, ``occupation_record``), chained one after the other in the audit trail's
hash chain by ``AuditEvent.save`` (``registry.models.audit``).

All or nothing: the rows run in one transaction (a refused row does not stop the rows after it from
being checked: each service undoes its own writes when it refuses); if any row was refused, the whole
transaction is rolled back and :class:`~registry.services.imports.ImportRejected` lists every problem with its line. A dry
run (the preview page) does the same and always rolls back.

Rows already in the registry (same mark, method and start time) are refused, so that importing the
same file twice does not double the occupations.

Movement check hook: every result is a proposed position made by ``position_propose``; the check of
a proposal against the mark's published position (frame and epoch, χ² test) belongs to the position
services and runs wherever they run it, for a batch as for one page. This module does not compare
positions itself beyond :func:`row_check`, which asks the movement service for each row's verdict
against the published position (computed for the preview and the command's output, not stored).
"""

from __future__ import annotations

import hashlib
from dataclasses import asdict, dataclass, field
from typing import Any

from django.conf import settings
from django.core.exceptions import ValidationError
from django.db import DatabaseError, transaction

from registry.errors import RegistryError
from registry.geodesy.accuracy import sigma_from_variance_m
from registry.io.common import RowError
from registry.io.occupations_csv import DEFAULT_MAX_ROWS, OccupationRow, parse_occupations_csv
from registry.models import MovementVerdict, Occupation, OccupationMethod, Position
from registry.roles import Ability
from registry.services.access import require_ability
from registry.services.fieldwork import occupation_record
from registry.services.imports import ImportRejected
from registry.services.movement import comparison_target, movement_compare
from registry.services.positions import position_propose


@dataclass
class BatchRow:
    """What one row did (or, in a dry run, would do)."""

    line: int
    mark: str
    method: str
    start_utc: Any  # aware datetime, UTC
    end_utc: Any
    antenna_height_arp_m: float | None
    result: dict[str, Any] | None
    check: dict[str, Any] | None = None

    @property
    def method_label(self) -> str:
        return str(OccupationMethod(self.method).label)


@dataclass
class BatchSummary:
    filename: str
    sha256: str
    rows: list[BatchRow] = field(default_factory=list)
    occupations: int = 0
    positions_proposed: int = 0
    dry_run: bool = False

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


class _DryRun(Exception):
    pass


def _max_rows() -> int:
    return int(getattr(settings, "REGISTRY", {}).get("BATCH_MAX_ROWS", DEFAULT_MAX_ROWS))


def movement_words(verdict: str, d_mm: tuple[float, float, float] | None) -> str:
    """A movement verdict in words, with the differences (E/N/U, mm) when there was something to compare."""
    label = str(MovementVerdict(verdict).label)
    if d_mm is None:
        return label
    e, n, u = (round(v, 1) + 0.0 for v in d_mm)  # + 0.0: no "-0.0"
    return f"{label}: d E {e:+.1f} mm, N {n:+.1f} mm, U {u:+.1f} mm"


def row_check(position: Position | None) -> dict[str, Any] | None:
    """A row's result compared with the mark's published position (movement service; computed, not stored).

    ``position_propose`` stores its own check with the proposal; the preview shows this comparison, run
    again by ``registry.services.movement`` so that it reads the same whether or not the rows are kept.
    """
    if position is None:
        return None
    outcome = movement_compare(position=position, published=comparison_target(position))
    d_mm: tuple[float, float, float] | None = None
    if outcome.result is not None:
        d_e, d_n, d_u = (round(float(v) * 1000.0, 1) for v in outcome.result.d_enu_m)
        d_mm = (d_e, d_n, d_u)
    return {
        "verdict": outcome.verdict,
        "words": movement_words(outcome.verdict, d_mm),
        "d_enu_mm": d_mm,
        "p_value": None if outcome.result is None else float(outcome.result.p_value),
        "reason": outcome.reason,
        "warnings": list(outcome.warnings),
    }


def _errors(exc: Exception, row: OccupationRow, *, prefix: str = "") -> list[RowError]:
    where = f"line {row.line}"
    out = []
    if isinstance(exc, ValidationError):
        items = exc.error_dict.items() if hasattr(exc, "error_dict") else [("", exc.error_list)]
        for name, errors in items:
            for err in errors:
                message = " ".join(err.messages)
                out.append(
                    RowError(
                        where,
                        row.line,
                        err.code or "invalid",
                        prefix + message,
                        "" if name == "__all__" else name,
                        row.mark,
                    )
                )
    elif isinstance(exc, RegistryError):
        out.append(RowError(where, row.line, exc.code, prefix + exc.message, "", row.mark))
    else:
        out.append(RowError(where, row.line, "database_refused", prefix + str(exc).strip(), "", row.mark))
    return out


def _already_recorded(rows: list[OccupationRow]) -> list[RowError]:
    """Rows whose mark, method and start time are already in the registry (one query)."""
    from registry.services._input import parse_aware_datetime

    wanted: dict[tuple[str, str, Any], OccupationRow] = {}
    for row in rows:
        try:
            start = parse_aware_datetime(row.occupation, "start_utc")
        except ValidationError:
            continue  # reported by the service
        wanted[(row.mark, row.occupation["method"], start)] = row
    if not wanted:
        return []
    codes = {k[0] for k in wanted}
    existing = Occupation.objects.filter(mark__code__in=codes).values_list("mark__code", "method", "start_utc")
    out = []
    for key in existing:
        found = wanted.get(tuple(key))
        if found is not None:
            out.append(
                RowError(
                    f"line {found.line}",
                    found.line,
                    "already_recorded",
                    "This occupation (same mark, method and start) is already in the registry.",
                    "start_utc",
                    found.mark,
                )
            )
    return out


def occupation_batch_import(*, actor, content: bytes, filename: str, dry_run: bool = False) -> BatchSummary:
    """Record every row of an occupation-results CSV, or nothing (technician or manager).

    Raises ``ImportRejected`` (every bad row, with its line and reason) or a coded
    ``ValidationError`` for a file that cannot be read at all; returns a :class:`BatchSummary`.
    """
    require_ability(actor, Ability.RECORD)
    sha256 = hashlib.sha256(content).hexdigest()
    try:
        text = bytes(content).decode("utf-8-sig")
    except UnicodeDecodeError:
        raise ValidationError(
            "The file is not UTF-8 text; save the CSV as UTF-8.", code="not_utf8", params={"name": filename}
        ) from None
    parsed = parse_occupations_csv(text, max_rows=_max_rows())
    errors = [RowError(f"line {p.line}", p.line, p.code, p.message, p.column, p.mark) for p in parsed.problems]
    if not parsed.rows and not errors:
        raise ValidationError("The file has no rows.", code="no_rows")
    summary = BatchSummary(filename=filename, sha256=sha256, dry_run=dry_run)
    source = f"Batch results {filename}"[:200]
    try:
        with transaction.atomic():
            errors += _already_recorded(parsed.rows)
            for row in parsed.rows:
                # No savepoint of our own per row: each service runs in its own atomic block, which rolls
                # its writes back (and clears PostgreSQL's error state) when it raises; a row whose result
                # was proposed before its occupation was refused leaves that proposal in the transaction,
                # which is rolled back as a whole as soon as any row was refused.
                try:
                    position = None
                    data = dict(row.occupation)
                    if row.result is not None:
                        result = {"source": source, **row.result}
                        position = position_propose(actor=actor, mark_code=row.mark, data=result)
                        data["result_position_id"] = position.pk
                    occupation = occupation_record(actor=actor, mark_code=row.mark, data=data)
                except (ValidationError, RegistryError, DatabaseError) as exc:
                    errors += _errors(exc, row)
                    continue
                summary.occupations += 1
                summary.positions_proposed += position is not None
                summary.rows.append(
                    BatchRow(
                        line=row.line,
                        mark=row.mark,
                        method=occupation.method,
                        start_utc=occupation.start_utc,
                        end_utc=occupation.end_utc,
                        antenna_height_arp_m=occupation.antenna_height_arp_m,
                        result=None
                        if position is None
                        else {
                            "frame_epsg": position.frame_epsg,
                            "epoch_yr": position.epoch_yr,
                            "lat_deg": position.lat_deg,
                            "lon_deg": position.lon_deg,
                            "h_m": position.h_m,
                            "sigma_e_mm": sigma_from_variance_m(position.cov_ee_m2) * 1000.0,
                            "sigma_n_mm": sigma_from_variance_m(position.cov_nn_m2) * 1000.0,
                            "sigma_u_mm": sigma_from_variance_m(position.cov_uu_m2) * 1000.0,
                        },
                        check=row_check(position),
                    )
                )
            if errors:
                raise ImportRejected(errors, filename=filename)
            if dry_run:
                raise _DryRun
    except _DryRun:
        pass
    return summary
