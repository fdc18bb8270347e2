"""Idempotency-Key on API writes (issue 11, "Edges" 6): a retried write is answered once.

Today (before the key) a client that retries a visit whose answer it lost records it twice.
"""

from __future__ import annotations

import json
import threading

import pytest
from django.db import connection

from registry.models import AuditEvent, IdempotencyRecord, Mark, Visit
from registry.services.marks import mark_create
from tests.api._shape import assert_error_shape

pytestmark = pytest.mark.django_db
VISIT = {"visited_on": "2024-05-01", "finding": "intact", "visitor": "Crew 2 (invented)", "notes": "Clean."}


@pytest.fixture
def mark(manager):
    return mark_create(actor=manager, data={"code": "ID-01", "name": "Idempotency test mark (invented)"})


def _post(client, url, body, key=None):
    headers = {"HTTP_IDEMPOTENCY_KEY": key} if key is not None else {}
    return client.post(url, data=json.dumps(body), content_type="application/json", **headers)


def test_without_a_key_a_retry_duplicates(mark, technician, api_client_for):
    client = api_client_for(technician)
    _post(client, "/api/marks/ID-01/visits/", VISIT)
    _post(client, "/api/marks/ID-01/visits/", VISIT)
    assert Visit.objects.count() == 2  # what the key is for


def test_the_same_key_and_body_returns_the_first_answer(mark, technician, api_client_for):
    client = api_client_for(technician)
    first = _post(client, "/api/marks/ID-01/visits/", VISIT, key="visit-7f3a")
    events = AuditEvent.objects.count()
    again = _post(client, "/api/marks/ID-01/visits/", VISIT, key="visit-7f3a")
    assert first.status_code == again.status_code == 201
    assert again.content == first.content and again["Idempotent-Replayed"] == "true"
    assert Visit.objects.count() == 1 and AuditEvent.objects.count() == events
    # formatted differently but the same JSON text? different bytes are a different request:
    other = _post(client, "/api/marks/ID-01/visits/", {**VISIT, "notes": "Other."}, key="visit-7f3a")
    error = assert_error_shape(other, 422, "idempotency_key_reused")
    assert "different request" in error["message"]
    assert Visit.objects.count() == 1


def test_keys_are_per_user(mark, technician, manager, api_client_for):
    _post(api_client_for(technician), "/api/marks/ID-01/visits/", VISIT, key="shared-key")
    r = _post(api_client_for(manager), "/api/marks/ID-01/visits/", VISIT, key="shared-key")
    assert r.status_code == 201 and "Idempotent-Replayed" not in r
    assert Visit.objects.count() == 2


def test_refusals_are_replayed_too_and_server_errors_are_not_kept(mark, viewer, manager, api_client_for):
    r1 = _post(api_client_for(viewer), "/api/marks/ID-01/visits/", VISIT, key="k-403")
    r2 = _post(api_client_for(viewer), "/api/marks/ID-01/visits/", VISIT, key="k-403")
    assert r1.status_code == r2.status_code == 403 and r2["Idempotent-Replayed"] == "true"
    # A PATCH and a mark creation with keys; Location and body come back the same.
    client = api_client_for(manager)
    a = _post(client, "/api/marks/", {"code": "ID-02", "name": "Second (invented)"}, key="create-ID-02")
    b = _post(client, "/api/marks/", {"code": "ID-02", "name": "Second (invented)"}, key="create-ID-02")
    assert a.status_code == b.status_code == 201 and a.content == b.content
    assert Mark.objects.filter(code="ID-02").count() == 1
    patch = client.patch(
        "/api/marks/ID-02/",
        data=json.dumps({"version": 1, "notes": "x"}),
        content_type="application/json",
        HTTP_IDEMPOTENCY_KEY="patch-1",
    )
    assert patch.status_code == 200 and IdempotencyRecord.objects.filter(key="patch-1").count() == 1


def test_a_bad_key_is_refused_in_the_error_shape(mark, technician, api_client_for):
    for key in ("", "x" * 256, "has space", "é"):
        r = _post(api_client_for(technician), "/api/marks/ID-01/visits/", VISIT, key=key)
        assert_error_shape(r, 400, "idempotency_key_invalid")
    assert Visit.objects.count() == 0


def test_a_key_older_than_a_day_is_forgotten(mark, technician, api_client_for):
    import datetime as dt

    client = api_client_for(technician)
    _post(client, "/api/marks/ID-01/visits/", VISIT, key="old-key")
    IdempotencyRecord.objects.update(
        created_at=IdempotencyRecord.objects.get().created_at - dt.timedelta(days=1, seconds=1)
    )
    r = _post(client, "/api/marks/ID-01/visits/", VISIT, key="old-key")
    assert r.status_code == 201 and "Idempotent-Replayed" not in r and Visit.objects.count() == 2
    assert IdempotencyRecord.objects.count() == 1  # the old record was removed


def test_token_users_are_recognised(mark, technician, client):
    from rest_framework.authtoken.models import Token

    token = Token.objects.create(user=technician)
    for _ in range(2):
        r = client.post(
            "/api/marks/ID-01/visits/",
            data=json.dumps(VISIT),
            content_type="application/json",
            HTTP_AUTHORIZATION=f"Token {token.key}",
            HTTP_IDEMPOTENCY_KEY="tok-1",
        )
        assert r.status_code == 201
    assert Visit.objects.count() == 1


def test_the_schema_documents_the_header(viewer, api_client_for):
    schema = api_client_for(viewer).get("/api/schema/?format=json").json()
    post = schema["paths"]["/api/marks/{code}/visits/"]["post"]
    assert any(p["name"] == "Idempotency-Key" and p["in"] == "header" for p in post["parameters"])
    assert "422" in post["responses"]


@pytest.mark.django_db(transaction=True)
def test_two_retries_at_once_write_once(technician, manager):
    """PostgreSQL: the second insert of the key waits for the first to commit, then replays it."""
    if connection.vendor != "postgresql":
        pytest.skip("needs PostgreSQL (threads on SQLite's in-memory test database lock)")
    from django.db import connections
    from rest_framework.authtoken.models import Token
    from rest_framework.test import APIClient

    mark_create(actor=manager, data={"code": "ID-01", "name": "Idempotency test mark (invented)"})
    token = Token.objects.create(user=technician).key
    barrier = threading.Barrier(3)
    answers: list[int] = []

    def retry():
        try:
            c = APIClient()
            barrier.wait(timeout=10)
            r = c.post(
                "/api/marks/ID-01/visits/",
                data=json.dumps(VISIT),
                content_type="application/json",
                HTTP_AUTHORIZATION=f"Token {token}",
                HTTP_IDEMPOTENCY_KEY="same-time",
            )
            answers.append(r.status_code)
        finally:
            connections.close_all()

    threads = [threading.Thread(target=retry) for _ in range(3)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=60)
    assert answers == [201, 201, 201]
    assert Visit.objects.count() == 1


def test_a_file_upload_retried_with_a_new_boundary_is_stored_once(mark, technician, api_client_for, settings, tmp_path):
    """Clients choose a new multipart boundary for every send; a retry differs only there."""
    from django.core.files.uploadedfile import SimpleUploadedFile
    from django.test.client import encode_multipart

    from registry.models import Attachment

    settings.MEDIA_ROOT = tmp_path / "media"
    client = api_client_for(technician)
    for boundary in ("first-send-3f9c", "second-send-a71e"):
        body = encode_multipart(boundary, {"file": SimpleUploadedFile("obs.24o", b"abc" * 5000), "kind": "rinex"})
        r = client.generic(
            "POST",
            "/api/marks/ID-01/attachments/",
            body,
            content_type=f"multipart/form-data; boundary={boundary}",
            HTTP_IDEMPOTENCY_KEY="upload-1",
        )
        assert r.status_code == 201, r.content
    assert r["Idempotent-Replayed"] == "true"
    assert Attachment.objects.count() == 1


def test_boundary_is_found_across_chunk_edges():
    import hashlib
    import io

    from registry.api.idempotency import _HashingStream

    body = b"--b0undary\r\nx" * 50 + b"tail--b0undary--"
    digests = []
    for chunk in (1, 3, 7, 10, 4096):
        stream = _HashingStream(io.BytesIO(body), hashlib.sha256(), b"b0undary")
        while stream.read(chunk):
            pass
        stream.drain()
        digests.append(stream.digest.hexdigest())
    assert len(set(digests)) == 1
    assert digests[0] == hashlib.sha256(body.replace(b"b0undary", _HashingStream.TOKEN)).hexdigest()
