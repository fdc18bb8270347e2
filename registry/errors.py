"""One exception base for the registry, with a machine-readable code and an HTTP status.

Services raise these (or Django's ``ValidationError`` with a ``code``); the API's
exception handler and the pages turn them into one error shape:
``{"error": {"code": ..., "message": ..., "details": ...}}``.
"""

from __future__ import annotations

from typing import Any


class RegistryError(Exception):
    code = "error"
    status = 400

    def __init__(self, message: str, *, code: str | None = None, details: Any = None):
        super().__init__(message)
        self.message = message
        if code is not None:
            self.code = code
        self.details = details


class InvalidInput(RegistryError):
    code = "invalid"
    status = 400


class PermissionDeniedError(RegistryError):
    code = "permission_denied"
    status = 403


class NotFound(RegistryError):
    """Raised for "does not exist" and "not yours" alike."""

    code = "not_found"
    status = 404


class Conflict(RegistryError):
    """A write against a stale version, or a state transition that is not allowed now."""

    code = "conflict"
    status = 409
