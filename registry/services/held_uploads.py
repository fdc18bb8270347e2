"""Uploaded files held between a preview and its confirmation (RINEX pre-fill, batch results).

A page that shows what a file *would* do (a preview) keeps the file so that the person does not
upload it again to confirm: the bytes are stored under ``held/`` in Django's default storage and
the page carries a signed token naming the stored file, its SHA-256, the user and the purpose.
A token is honoured for ``REGISTRY["HELD_UPLOAD_MINUTES"]`` minutes (default 30), only for the user
who uploaded the file and only for its purpose; the bytes are checked against the SHA-256 before
use, so the committed file is exactly the one previewed. Held files older than that are removed
whenever a new file is held.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import uuid

from django.conf import settings
from django.core import signing
from django.core.exceptions import ValidationError
from django.core.files.base import ContentFile
from django.core.files.storage import default_storage
from django.utils import timezone

_SALT = "registry.held-upload"
_FOLDER = "held"
DEFAULT_MINUTES = 30.0


def _minutes() -> float:
    return float(getattr(settings, "REGISTRY", {}).get("HELD_UPLOAD_MINUTES", DEFAULT_MINUTES))


def _expired_error() -> ValidationError:
    return ValidationError(
        "The file held for confirmation has expired or is not yours; upload it again.", code="held_upload_expired"
    )


def _sweep() -> None:
    """Remove held files older than the holding time (best effort)."""
    try:
        _dirs, files = default_storage.listdir(_FOLDER)
    except (FileNotFoundError, NotImplementedError, OSError):
        return
    limit = timezone.now() - _dt.timedelta(minutes=_minutes())
    for name in files:
        path = f"{_FOLDER}/{name}"
        try:
            if default_storage.get_modified_time(path) < limit:
                default_storage.delete(path)
        except (FileNotFoundError, NotImplementedError, OSError):
            continue


def hold_upload(*, actor, content: bytes, filename: str, purpose: str) -> str:
    """Store ``content`` and return the signed token that gives it back (:func:`take_held_upload`)."""
    _sweep()
    sha256 = hashlib.sha256(content).hexdigest()
    stored = default_storage.save(f"{_FOLDER}/{uuid.uuid4().hex}.bin", ContentFile(content))
    return signing.dumps(
        {"n": stored, "h": sha256, "u": getattr(actor, "pk", None), "p": purpose, "f": filename[:255]}, salt=_SALT
    )


def take_held_upload(*, actor, token: str, purpose: str) -> tuple[bytes, str]:
    """``(content, original filename)`` of a held file; a coded ``ValidationError`` when expired or foreign."""
    try:
        data = signing.loads(str(token), salt=_SALT, max_age=_dt.timedelta(minutes=_minutes()))
    except signing.BadSignature:
        raise _expired_error() from None
    if data.get("u") != getattr(actor, "pk", None) or data.get("p") != purpose:
        raise _expired_error()
    try:
        with default_storage.open(data["n"], "rb") as handle:
            content = handle.read()
    except (FileNotFoundError, OSError):
        raise _expired_error() from None
    if hashlib.sha256(content).hexdigest() != data["h"]:
        raise _expired_error()
    return content, data["f"]


def release_held_upload(token: str) -> None:
    """Remove a held file once it has been used (an unknown or expired token is ignored)."""
    try:
        data = signing.loads(str(token), salt=_SALT)
    except signing.BadSignature:
        return
    try:
        default_storage.delete(data["n"])
    except (FileNotFoundError, OSError):
        pass
