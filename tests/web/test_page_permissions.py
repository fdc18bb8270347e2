"""Every page × every role: allowed, refused (403 with a plain page), or sent to sign in."""

from __future__ import annotations

from urllib.parse import quote

import pytest
from django.urls import reverse

from registry.models import AuditEvent, Mark

ROLES = ["viewer", "technician", "manager", "signatory", "admin_user_role"]
READ_PAGES = [("web:mark-list", {}), ("web:mark-detail", {"code": "KV-002"})]
MANAGE_PAGES = [
    ("web:mark-create", {}),
    ("web:mark-edit", {"code": "KV-002"}),
    ("web:mark-combine", {"code": "KV-001"}),
]


def _user(request, role):
    return None if role == "anonymous" else request.getfixturevalue(role)


@pytest.mark.django_db
@pytest.mark.parametrize("role", ROLES)
@pytest.mark.parametrize("name,kwargs", READ_PAGES)
def test_every_role_reads(request, kestrel, signed_in, role, name, kwargs):
    response = signed_in(_user(request, role)).get(reverse(name, kwargs=kwargs))
    assert response.status_code == 200
    assert b"KV-002" in response.content


@pytest.mark.django_db
@pytest.mark.parametrize("role,allowed", [(r, r == "manager") for r in ROLES])
@pytest.mark.parametrize("name,kwargs", MANAGE_PAGES)
def test_only_managers_open_create_and_edit(request, kestrel, signed_in, role, allowed, name, kwargs):
    response = signed_in(_user(request, role)).get(reverse(name, kwargs=kwargs))
    if allowed:
        assert response.status_code == 200
        assert b"<form" in response.content
    else:
        assert response.status_code == 403
        assert b"Not allowed" in response.content
        assert b"create and edit marks" in response.content
        assert b'name="version"' not in response.content


@pytest.mark.django_db
@pytest.mark.parametrize("name,kwargs", READ_PAGES + MANAGE_PAGES)
def test_anonymous_is_sent_to_sign_in(kestrel, client, name, kwargs):
    url = reverse(name, kwargs=kwargs)
    response = client.get(url)
    assert response.status_code == 302
    assert response["Location"] == f"{reverse('web:login')}?next={quote(url)}"


@pytest.mark.django_db
def test_user_without_role_is_refused_everywhere(kestrel, make_user, signed_in):
    nobody = make_user("noel")
    client = signed_in(nobody)
    for name, kwargs in READ_PAGES + MANAGE_PAGES:
        response = client.get(reverse(name, kwargs=kwargs))
        assert response.status_code == 403, name
    assert b"no role" in response.content


@pytest.mark.django_db
@pytest.mark.parametrize("role", ["viewer", "technician", "signatory", "admin_user_role", "anonymous"])
def test_refused_writes_change_nothing(request, kestrel, signed_in, role):
    client = signed_in(_user(request, role))
    before_marks = list(Mark.objects.order_by("pk").values())
    before_audit = AuditEvent.objects.count()
    created = client.post(
        reverse("web:mark-create"),
        {"code": "KV-999", "name": "Sneaky", "monument": "other", "stability": "unknown", "sky_view": "unknown"},
    )
    edited = client.post(
        reverse("web:mark-edit", kwargs={"code": "KV-002"}),
        {"name": "Renamed", "monument": "other", "stability": "unknown", "sky_view": "unknown", "version": "1"},
    )
    expected = 302 if role == "anonymous" else 403
    assert created.status_code == expected
    assert edited.status_code == expected
    assert list(Mark.objects.order_by("pk").values()) == before_marks
    assert AuditEvent.objects.count() == before_audit


@pytest.mark.django_db
def test_unknown_mark_is_404_for_viewers_and_managers(kestrel, signed_in, viewer, manager):
    assert signed_in(viewer).get(reverse("web:mark-detail", kwargs={"code": "NOPE-1"})).status_code == 404
    assert signed_in(manager).get(reverse("web:mark-edit", kwargs={"code": "NOPE-1"})).status_code == 404


@pytest.mark.django_db
def test_home_redirects_to_the_list(signed_in, viewer):
    response = signed_in(viewer).get("/")
    assert response.status_code == 302 and response["Location"] == reverse("web:mark-list")


# ---- sign in / sign out


@pytest.mark.django_db
def test_sign_in_page_and_good_password(client, viewer):
    page = client.get(reverse("web:login"))
    assert page.status_code == 200 and b"Sign in" in page.content
    response = client.post(reverse("web:login"), {"username": "vera", "password": "pw-vera-123!"})
    assert response.status_code == 302 and response["Location"] == reverse("web:mark-list")
    assert client.get(reverse("web:mark-list")).status_code == 200


@pytest.mark.django_db
def test_sign_in_follows_next(client, viewer, kestrel):
    target = reverse("web:mark-detail", kwargs={"code": "KV-001"})
    response = client.post(reverse("web:login"), {"username": "vera", "password": "pw-vera-123!", "next": target})
    assert response["Location"] == target


@pytest.mark.django_db
def test_sign_in_refuses_a_wrong_password(client, viewer):
    response = client.post(reverse("web:login"), {"username": "vera", "password": "wrong"})
    assert response.status_code == 200
    assert b"correct username and password" in response.content
    assert client.get(reverse("web:mark-list")).status_code == 302


@pytest.mark.django_db
def test_sign_out_is_a_post_and_ends_the_session(signed_in, viewer):
    client = signed_in(viewer)
    assert client.get(reverse("web:logout")).status_code == 405
    response = client.post(reverse("web:logout"))
    assert response.status_code == 302 and response["Location"] == reverse("web:login")
    assert client.get(reverse("web:mark-list")).status_code == 302


@pytest.mark.django_db
def test_media_needs_sign_in(kestrel, client, signed_in, viewer, settings):
    url = kestrel["photo"].file.url
    assert client.get(url).status_code == 302
    client = signed_in(viewer)
    settings.DEBUG = False  # production: nginx sends the file (tests/web/test_media_access.py)
    assert client.get(url)["X-Accel-Redirect"].startswith("/_protected_media/")
    settings.DEBUG = True
    response = client.get(url)
    assert response.status_code == 200
    assert b"".join(response.streaming_content).startswith(b"\x89PNG")
