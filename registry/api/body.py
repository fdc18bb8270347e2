"""What a write sent: the request body as plain fields, one way for every API view.

A JSON object, or the fields of a form or multipart post, become a mapping of field names to
values; anything else sent as JSON (a list, a string, a number) is refused as ``invalid_payload``
by :func:`request_body`. Views that read uploaded files take :func:`request_fields`, which leaves
the refusal to the service (a missing file is a missing field).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from django.core.exceptions import ValidationError


def request_body(request) -> dict[str, Any]:
    """The request body as a plain dict (JSON object or form fields)."""
    data = request.data
    if hasattr(data, "dict"):  # QueryDict from a form post
        return data.dict()
    if not isinstance(data, dict):
        raise ValidationError("Send a JSON object.", code="invalid_payload")
    return dict(data)


def request_fields(request) -> Mapping[str, Any]:
    """The posted fields with their files (multipart), or an empty mapping when the body has none."""
    data = request.data
    return data if isinstance(data, Mapping) or hasattr(data, "getlist") else {}
