"""What an import reports: the refusal with its row errors, the summary, the file's format.

Shared by the marks import (``registry.services.imports``) and the occupations import.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from pathlib import PurePath
from typing import Any

from django.core.exceptions import ValidationError

from registry.errors import InvalidInput, RegistryError
from registry.io.common import MarkRecord, RowError

FORMATS = ("csv", "geojson")
#: Most row errors a refusal carries in its message details and shows on a page; the full list is
#: kept for download (``registry.services.import_runs``).
ERRORS_SHOWN = 200
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


def service_errors(exc: Exception, record: MarkRecord) -> list[RowError]:
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
