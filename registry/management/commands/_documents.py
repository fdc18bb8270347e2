"""Shared plumbing of the document commands (build_sheet, build_report, check_document, sign_document)."""

from __future__ import annotations

import json
from pathlib import Path

from django.core.exceptions import ValidationError
from django.core.management.base import CommandError

from registry.errors import RegistryError


def refusal(exc: Exception) -> CommandError:
    """A service's refusal as a command error in words (nothing was changed)."""
    if isinstance(exc, ValidationError):
        return CommandError(" ".join(exc.messages) + " Nothing was changed.")
    if isinstance(exc, RegistryError):
        return CommandError(exc.message + " Nothing was changed.")
    return CommandError(str(exc))


def write_pdf(path: str | None, data: bytes) -> str | None:
    if not path:
        return None
    target = Path(path)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_bytes(data)
    except OSError as exc:
        raise CommandError(f"Cannot write {path}: {exc.strerror}.") from None
    return str(target)


def document_json(doc, path: str | None) -> str:
    return json.dumps(
        {
            "document_code": doc.code,
            "revision": doc.revision,
            "state": doc.state,
            "sha256": doc.sha256,
            "pages": doc.page_count,
            "path": path,
        },
        indent=2,
    )


def document_words(doc, path: str | None) -> str:
    kind = doc.get_kind_display()
    subject = f"mark {doc.mark.code}" if doc.mark_id else f"job {doc.job.code}"
    lines = [
        f"{kind[0].upper() + kind[1:]} of {subject}: document {doc.code}, revision {doc.revision}, {doc.state}.",
        f"{doc.page_count} page(s), {doc.size_bytes} bytes, SHA-256 {doc.sha256}.",
    ]
    if path:
        lines.append(f"Written to {path}.")
    return "\n".join(lines)
