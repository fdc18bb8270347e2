"""One error shape for the whole JSON API.

Every refused request answers ``{"error": {"code": ..., "message": ..., "details": ...}}``
with the HTTP status of the error:

- ``registry.errors.RegistryError`` and its subclasses: their own ``status`` and ``code``
  (``NotFound`` 404, ``PermissionDeniedError`` 403, ``Conflict`` 409, ``InvalidInput`` 400);
- Django's ``ValidationError`` raised by a service: 400, code ``invalid``, ``details`` maps
  each field to a list of ``{"code", "message"}`` (non-field errors under
  ``non_field_errors``);
- Django REST framework's own exceptions (parse errors, authentication, permission,
  method not allowed, throttling...): their status and code;
- ``Http404`` and Django's ``PermissionDenied``: 404 and 403;
- a write against a published position or the audit trail (guards in the models): 409.

Errors are rendered as JSON even when the request asked for GeoJSON.

Anything else is a bug and is left to propagate (a 500 with the server's log entry).
"""

from __future__ import annotations

from typing import Any

from django.core.exceptions import PermissionDenied as DjangoPermissionDenied
from django.core.exceptions import ValidationError as DjangoValidationError
from django.http import Http404
from rest_framework import exceptions as drf_exceptions
from rest_framework import status as http_status
from rest_framework.renderers import JSONRenderer
from rest_framework.response import Response
from rest_framework.views import exception_handler as drf_default_handler

from registry.errors import RegistryError
from registry.models import AuditTrailError, FrozenPositionError

NON_FIELD_KEY = "non_field_errors"


def error_body(code: str, message: str, details: Any = None) -> dict[str, Any]:
    return {"error": {"code": code, "message": message, "details": details}}


def _django_item(err: DjangoValidationError) -> dict[str, Any]:
    message = err.message
    if err.params:
        try:
            message = message % err.params
        except (TypeError, KeyError, ValueError):
            pass
    return {"code": err.code or "invalid", "message": str(message)}


def validation_details(exc: DjangoValidationError) -> dict[str, list[dict[str, Any]]]:
    """``{field: [{"code", "message"}, ...]}`` from a Django ValidationError."""
    if hasattr(exc, "error_dict"):
        return {
            (NON_FIELD_KEY if key == "__all__" else key): [_django_item(e) for e in items]
            for key, items in exc.error_dict.items()
        }
    return {NON_FIELD_KEY: [_django_item(e) for e in exc.error_list]}


def _drf_details(detail: Any, codes: Any) -> Any:
    """DRF's nested ErrorDetail structure → the same nesting with ``{"code", "message"}`` leaves."""
    if isinstance(detail, dict):
        return {
            key: _drf_details(value, codes.get(key) if isinstance(codes, dict) else codes)
            for key, value in detail.items()
        }
    if isinstance(detail, list):
        if isinstance(codes, list) and len(codes) == len(detail):
            return [_drf_details(d, c) for d, c in zip(detail, codes, strict=True)]
        return [_drf_details(d, codes) for d in detail]
    return {
        "code": str(codes if isinstance(codes, str) else getattr(detail, "code", "invalid")),
        "message": str(detail),
    }


def _summary(details: dict[str, list[dict[str, Any]]]) -> str:
    parts = []
    for key, items in details.items():
        for item in items if isinstance(items, list) else [items]:
            text = item.get("message", "") if isinstance(item, dict) else str(item)
            parts.append(text if key == NON_FIELD_KEY else f"{key}: {text}")
    return "Invalid input. " + " ".join(parts[:5]) if parts else "Invalid input."


def _errors_as_json(context) -> None:
    """Errors are JSON even when the request asked for another format (e.g. ``?format=geojson``)."""
    request = context.get("request")
    renderer = getattr(request, "accepted_renderer", None)
    if request is not None and renderer is not None and getattr(renderer, "format", None) not in ("json", "api"):
        request.accepted_renderer = JSONRenderer()
        request.accepted_media_type = JSONRenderer.media_type


def api_exception_handler(exc, context):
    """DRF ``EXCEPTION_HANDLER``: turn every expected error into the one shape."""
    _errors_as_json(context)
    if isinstance(exc, RegistryError):
        return Response(error_body(exc.code, exc.message, exc.details), status=exc.status)
    if isinstance(exc, DjangoValidationError):
        details = validation_details(exc)
        return Response(error_body("invalid", _summary(details), details), status=http_status.HTTP_400_BAD_REQUEST)
    if isinstance(exc, FrozenPositionError):
        # position_frozen, position_state (a transition not allowed) or position_history (a delete)
        return Response(error_body(exc.code, str(exc)), status=http_status.HTTP_409_CONFLICT)
    if isinstance(exc, AuditTrailError):
        return Response(error_body("audit_append_only", str(exc)), status=http_status.HTTP_409_CONFLICT)

    response = drf_default_handler(exc, context)  # handles APIException, Http404, PermissionDenied (+ headers)
    if response is None:
        return None
    if isinstance(exc, drf_exceptions.ValidationError):
        details = _drf_details(exc.detail, exc.get_codes())
        if not isinstance(details, dict):
            details = {NON_FIELD_KEY: details if isinstance(details, list) else [details]}
        response.data = error_body("invalid", _summary(details), details)
        return response
    if isinstance(exc, Http404):
        response.data = error_body("not_found", "Not found.")
        return response
    if isinstance(exc, DjangoPermissionDenied):
        response.data = error_body("permission_denied", "You do not have permission to do this.")
        return response
    if isinstance(exc, drf_exceptions.APIException):
        codes = exc.get_codes()
        code = codes if isinstance(codes, str) else exc.default_code
        detail = exc.detail
        message = str(detail) if not isinstance(detail, dict | list) else str(exc.default_detail)
        response.data = error_body(code, message)
        return response
    return response
