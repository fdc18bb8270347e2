"""Uploaded files reach only signed-in users with the VIEW ability (review M-2).

Development (DEBUG): Django streams the file. Production: an empty answer whose
``X-Accel-Redirect`` header names nginx's internal location (deploy/nginx/registry.conf), so
nginx sends the file only after this check. Paths are cleaned first: no traversal.
"""

from __future__ import annotations

import pytest
from django.contrib.auth import get_user_model

pytestmark = pytest.mark.django_db


@pytest.fixture
def production(settings):
    settings.DEBUG = False
    return settings


def test_production_answers_with_x_accel_redirect(kestrel, signed_in, viewer, production):
    photo = kestrel["photo"].file
    response = signed_in(viewer).get(photo.url)
    assert response.status_code == 200
    assert response["X-Accel-Redirect"] == "/_protected_media/" + photo.name
    assert response.content == b""  # nginx sends the body
    assert "Content-Type" not in response  # nginx sets it from the file name
    assert response["Cache-Control"] == "private"


def test_the_internal_prefix_is_a_setting(kestrel, signed_in, viewer, production):
    production.REGISTRY = {**production.REGISTRY, "MEDIA_ACCEL_PREFIX": "/files-inside/"}
    rinex = kestrel["rinex"].file
    response = signed_in(viewer).get(rinex.url)
    assert response["X-Accel-Redirect"] == "/files-inside/" + rinex.name


@pytest.mark.parametrize("debug", [True, False])
def test_anonymous_is_sent_to_sign_in_and_gets_no_file(kestrel, client, settings, debug):
    settings.DEBUG = debug
    response = client.get(kestrel["photo"].file.url)
    assert response.status_code == 302 and "/signin/" in response["Location"]
    assert "X-Accel-Redirect" not in response


def test_a_user_without_a_role_is_refused(kestrel, signed_in, production):
    nobody = get_user_model().objects.create_user("norole", password="x")
    response = signed_in(nobody).get(kestrel["photo"].file.url)
    assert response.status_code == 403
    assert "X-Accel-Redirect" not in response


def test_an_inactive_user_is_refused(kestrel, signed_in, viewer, production):
    client = signed_in(viewer)
    viewer.is_active = False
    viewer.save()
    response = client.get(kestrel["photo"].file.url)
    assert response.status_code in (302, 403)
    assert "X-Accel-Redirect" not in response


@pytest.mark.parametrize(
    "path",
    [
        "../registry.sqlite3",
        "attachments/../../registry.sqlite3",
        "attachments/./x.png",
        "attachments//x.png",
        "..%2Fregistry.sqlite3",
        "%2e%2e/registry.sqlite3",
        "attachments\\..\\..\\secret",
        "no-such-file.png",
    ],
)
@pytest.mark.parametrize("debug", [True, False])
def test_traversal_and_unknown_paths_are_refused(kestrel, signed_in, viewer, media_root, settings, path, debug):
    settings.DEBUG = debug
    outside = media_root.parent / "registry.sqlite3"
    outside.write_bytes(b"SQLite format 3\x00 (invented)")
    response = signed_in(viewer).get("/media/" + path)
    assert response.status_code in (400, 404)
    assert "X-Accel-Redirect" not in response
    body = b"".join(response.streaming_content) if response.streaming else response.content
    assert b"SQLite format 3" not in body


def test_a_symbolic_link_out_of_media_root_is_refused(kestrel, signed_in, viewer, media_root, production):
    outside = media_root.parent / "secret.txt"
    outside.write_text("invented secret")
    (media_root / "link.txt").symlink_to(outside)
    response = signed_in(viewer).get("/media/link.txt")
    assert response.status_code == 404
    assert "X-Accel-Redirect" not in response


def test_debug_streams_the_file(kestrel, signed_in, viewer, settings):
    settings.DEBUG = True
    response = signed_in(viewer).get(kestrel["photo"].file.url)
    assert response.status_code == 200
    assert b"".join(response.streaming_content).startswith(b"\x89PNG")
    assert "X-Accel-Redirect" not in response
