"""OpenAPI post-processing: every operation documents the error answers it can give.

drf-spectacular documents what each view declares. The answers that any operation can give
(the API's one error shape, ``registry/api/errors.py``) are added here once, so that the schema
matches what the endpoints return (checked by schemathesis in ``tests/api/test_schemathesis.py``):

- every operation: 400 (invalid input, including paging and query values), 401 (not signed
  in), 403 (role), 404 (no such object, or an address that does not exist), 406 (an ``Accept``
  header the operation cannot answer);
- operations with a request body: 413 (body larger than the server accepts) and 415 (a media
  type the operation does not read);
- writes (POST, PUT, PATCH, DELETE): the ``Idempotency-Key`` header, 409 (a stale version or a
  state that does not allow the action) and 422 (the key was used for a different request).

A 4xx answer declared without a body schema gets the error shape.
"""

from __future__ import annotations

from typing import Any

ERROR_REF = {"$ref": "#/components/schemas/Error"}
WRITE_METHODS = {"post", "put", "patch", "delete"}

COMMON = {
    "400": "Invalid input: {error: {code, message, details: {field: [{code, message}]}}}.",
    "401": "Not signed in (token or session).",
    "403": "Your role does not allow this.",
    "404": "No such object, or not visible to you.",
    "406": "The Accept header asks for a format this operation does not answer.",
}
WITH_BODY = {
    "413": "The request body is larger than the server accepts (code request_too_large).",
    "415": "The request body's media type is not one this operation reads.",
}
WRITES = {
    "409": "A conflict: a stale version, or a state that does not allow the action.",
    "422": "The Idempotency-Key was already used for a different request (code idempotency_key_reused).",
}

IDEMPOTENCY_HEADER = {
    "in": "header",
    "name": "Idempotency-Key",
    "required": False,
    "schema": {"type": "string", "minLength": 1, "maxLength": 255, "pattern": "^[\\x21-\\x7e]+$"},
    "description": (
        "Optional. A key of your choosing (1-255 visible ASCII characters, e.g. a UUID) that makes a retried "
        "write safe: for a day, the same key with the same request returns the first answer again (with the "
        "header Idempotent-Replayed: true) instead of doing the write twice. Keys are kept per user."
    ),
}


def _error_response(description: str) -> dict[str, Any]:
    return {"description": description, "content": {"application/json": {"schema": ERROR_REF}}}


def add_error_responses(result: dict[str, Any], generator, request, public) -> dict[str, Any]:
    """drf-spectacular ``POSTPROCESSING_HOOKS`` entry (see module docstring)."""
    for path, operations in result.get("paths", {}).items():
        if not path.startswith("/api/"):
            continue
        for method, operation in operations.items():
            if method not in WRITE_METHODS and method != "get":
                continue
            responses = operation.setdefault("responses", {})
            wanted = dict(COMMON)
            if "requestBody" in operation:
                wanted.update(WITH_BODY)
            if method in WRITE_METHODS:
                wanted.update(WRITES)
                params = operation.setdefault("parameters", [])
                if not any(p.get("name") == "Idempotency-Key" for p in params):
                    params.append(dict(IDEMPOTENCY_HEADER))
            for status, description in wanted.items():
                responses.setdefault(status, _error_response(description))
            for status, response in responses.items():
                if status.startswith("4") and not response.get("content"):
                    response["content"] = {"application/json": {"schema": ERROR_REF}}
    return result
