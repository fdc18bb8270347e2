"""The one error shape of the API, asserted the same way everywhere."""

from __future__ import annotations

import json


def assert_error_shape(response, status: int, code: str) -> dict:
    """{"error": {"code", "message", "details"}} and nothing else; returns the inner object."""
    assert response.status_code == status, response.content
    assert response["Content-Type"].startswith("application/json")
    body = json.loads(response.content)
    assert set(body) == {"error"}
    assert set(body["error"]) == {"code", "message", "details"}
    assert body["error"]["code"] == code
    assert isinstance(body["error"]["message"], str) and body["error"]["message"]
    return body["error"]
