"""The API permission matrix: every role × every endpoint and method, allowed or refused.

A refused request answers 401 (not signed in) or 403 (role lacks the ability) in the one
error shape, and changes nothing (the audit trail does not grow).
"""

from __future__ import annotations

import pytest

from registry.models import AuditEvent
from registry.services.positions import position_propose
from tests.services._data import make_mark, make_published, position_data

pytestmark = pytest.mark.django_db

ROLES = ["anonymous", "no_role", "viewer", "technician", "manager", "signatory", "admin"]
# Which roles hold which ability (registry/roles.py).
VIEW = {"viewer", "technician", "manager", "signatory", "admin"}
RECORD = {"technician", "manager"}
MANAGE = {"manager"}

# (name, method, url template, body, roles allowed, status when allowed)
ENDPOINTS = [
    ("list marks", "get", "/api/marks/", None, VIEW, 200),
    ("list marks as GeoJSON", "get", "/api/marks/?format=geojson", None, VIEW, 200),
    ("create mark", "post", "/api/marks/", {"code": "QR-900", "name": "New (invented)"}, MANAGE, 201),
    ("read mark", "get", "/api/marks/QR-101/", None, VIEW, 200),
    ("edit mark", "patch", "/api/marks/QR-101/", {"version": 1, "notes": "Checked"}, MANAGE, 200),
    (
        "set mark status",
        "post",
        "/api/marks/QR-101/status/",
        {"version": 1, "status": "retired", "note": "r"},
        MANAGE,
        200,
    ),
    ("list positions", "get", "/api/marks/QR-101/positions/", None, VIEW, 200),
    ("propose position", "post", "/api/marks/QR-101/positions/", position_data(epoch_yr=2023.0), RECORD, 201),
    ("read position", "get", "/api/positions/{proposed}/", None, VIEW, 200),
    ("publish position", "post", "/api/positions/{proposed}/publish/", {}, MANAGE, 200),
    ("reject position", "post", "/api/positions/{proposed}/reject/", {"note": "Float only"}, MANAGE, 200),
    ("withdraw position", "post", "/api/positions/{published}/withdraw/", {"note": "Blunder"}, MANAGE, 200),
]


@pytest.fixture
def scene(manager, technician):
    make_mark(manager)
    published = make_published(manager, technician)
    proposed = position_propose(
        actor=technician, mark_code="QR-101", data=position_data(source="repeat session (invented)")
    )  # same epoch: no movement
    return {"published": published.pk, "proposed": proposed.pk}


@pytest.fixture
def user_for_role(request, make_user):
    def get(role: str):
        if role == "anonymous":
            return None
        if role == "no_role":
            return make_user("nils", None)
        return {
            "viewer": lambda: request.getfixturevalue("viewer"),
            "technician": lambda: request.getfixturevalue("technician"),
            "manager": lambda: request.getfixturevalue("manager"),
            "signatory": lambda: request.getfixturevalue("signatory"),
            "admin": lambda: request.getfixturevalue("admin_user_role"),
        }[role]()

    return get


@pytest.mark.parametrize("role", ROLES)
@pytest.mark.parametrize(
    ("name", "method", "url", "body", "allowed", "ok_status"), ENDPOINTS, ids=[e[0] for e in ENDPOINTS]
)
def test_permission_matrix(scene, user_for_role, api_client_for, role, name, method, url, body, allowed, ok_status):
    client = api_client_for(user_for_role(role))
    events_before = AuditEvent.objects.count()
    kwargs = {"format": "json"} if body is not None else {}
    response = (
        getattr(client, method)(url.format(**scene), body, **kwargs)
        if body is not None
        else getattr(client, method)(url.format(**scene))
    )
    if role in allowed:
        assert response.status_code == ok_status, response.content
        if method != "get":
            assert AuditEvent.objects.count() > events_before
    else:
        expected = 401 if role == "anonymous" else 403
        assert response.status_code == expected, response.content
        error = response.json()["error"]
        assert error["code"] == ("not_authenticated" if role == "anonymous" else "permission_denied")
        assert error["message"]
        assert AuditEvent.objects.count() == events_before


def test_token_authentication_works(scene, viewer):
    from rest_framework.authtoken.models import Token
    from rest_framework.test import APIClient

    token = Token.objects.create(user=viewer)
    client = APIClient()
    assert client.get("/api/marks/QR-101/", HTTP_AUTHORIZATION=f"Token {token.key}").status_code == 200
    refused = client.get("/api/marks/QR-101/", HTTP_AUTHORIZATION="Token not-a-real-token")
    assert refused.status_code == 401
    assert refused.json()["error"]["code"] == "authentication_failed"


def test_session_authentication_needs_csrf_for_writes(scene, manager):
    from rest_framework.test import APIClient

    client = APIClient(enforce_csrf_checks=True)
    client.force_login(manager)
    assert client.get("/api/marks/QR-101/").status_code == 200
    response = client.patch("/api/marks/QR-101/", {"version": 1, "notes": "x"}, format="json")
    assert response.status_code == 403
    assert response.json()["error"]["code"] == "permission_denied"
    assert "CSRF" in response.json()["error"]["message"]
