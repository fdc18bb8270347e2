"""The session read with its user in one query (``registry.sessions``, ``registry.auth_backend``).

The row's user id only saves a query: which user a request is signed in as is still decided by the
session's own data and Django's checks (the backend named in the session, the password hash, an active
account), all from the rows as they are at that request. These tests change those rows between two
requests and expect the very next request to see the change, on the pages and on the nearby API.
"""

from __future__ import annotations

import pytest
from django.contrib.auth import SESSION_KEY
from django.contrib.auth.models import Group
from django.db import connection
from django.test.utils import CaptureQueriesContext

from registry.sessions.models import SignInSession

NEAR = "/api/marks/near/?lat=45.2&lon=-110.6&radius_km=5&limit=20"


def _row(client) -> SignInSession:
    return SignInSession.objects.get(session_key=client.cookies["sessionid"].value)


@pytest.mark.django_db
def test_a_signed_in_session_names_its_user_and_a_sign_out_removes_it(client, viewer):
    assert not SignInSession.objects.filter(user_id=viewer.pk).exists()
    signed_in = client.post("/signin/", {"username": "vera", "password": "pw-vera-123!"})  # the sign-in form
    assert signed_in.status_code == 302
    row = _row(client)
    assert row.user_id == viewer.pk
    assert str(row.get_decoded()[SESSION_KEY]) == str(viewer.pk)
    assert client.get(NEAR).status_code == 200
    client.logout()
    assert not SignInSession.objects.filter(session_key=row.session_key).exists()
    client.cookies["sessionid"] = row.session_key  # the signed-out session's cookie, kept by a stranger
    assert client.get(NEAR).status_code in (401, 403)


@pytest.mark.django_db
def test_the_user_read_with_the_session_is_the_user_the_orm_reads(client, viewer):
    """Every field as the ORM gives it (SQLite gives dates as text unless converted), and the roles."""
    from django.contrib.auth import get_user_model

    client.force_login(viewer)  # sets last_login: a date the user's row holds
    response = client.get(NEAR)
    user = response.wsgi_request.user
    fresh = get_user_model().objects.get(pk=viewer.pk)
    for field in get_user_model()._meta.concrete_fields:
        assert getattr(user, field.attname) == getattr(fresh, field.attname), field.name
    assert user.last_login is not None and user.last_login.tzinfo is not None
    assert user._registry_group_names == frozenset({"viewer"})
    assert user.get_all_permissions() == fresh.get_all_permissions()


@pytest.mark.django_db
def test_a_role_taken_away_refuses_the_very_next_api_request(client, viewer):
    client.force_login(viewer)
    assert client.get(NEAR).status_code == 200
    viewer.groups.remove(Group.objects.get(name="viewer"))
    refused = client.get(NEAR)
    assert refused.status_code == 403 and refused.json()["error"]["code"]
    viewer.groups.add(Group.objects.get(name="viewer"))
    assert client.get(NEAR).status_code == 200


@pytest.mark.django_db
def test_a_changed_password_signs_the_other_sessions_out(client, viewer):
    """Django's session hash check still runs on the user read with the session."""
    client.force_login(viewer)
    key = client.cookies["sessionid"].value
    assert client.get(NEAR).status_code == 200
    viewer.set_password("a-new-password-of-vera-77")
    viewer.save()
    assert client.get(NEAR).status_code in (401, 403)
    assert not SignInSession.objects.filter(session_key=key).exists()  # flushed, as Django does


@pytest.mark.django_db
def test_a_deleted_or_deactivated_user_reads_nothing(client, viewer, make_user):
    client.force_login(viewer)
    viewer.is_active = False
    viewer.save(update_fields=["is_active"])
    assert client.get(NEAR).status_code in (401, 403)
    gone = make_user("gone", "viewer")
    client.force_login(gone)
    assert client.get(NEAR).status_code == 200
    gone.delete()
    assert client.get(NEAR).status_code in (401, 403)


@pytest.mark.django_db
def test_the_row_s_user_id_does_not_decide_who_is_signed_in(client, viewer, manager):
    """A row naming another user than its data (written outside the engine) costs a second query and
    still signs the request in as the data's user."""
    client.force_login(viewer)
    assert client.get(NEAR).status_code == 200  # the answer cached: the next request reads only the rows below
    SignInSession.objects.filter(session_key=client.cookies["sessionid"].value).update(user_id=manager.pk)
    with CaptureQueriesContext(connection) as ctx:
        response = client.get(NEAR)
    assert response.status_code == 200 and response.wsgi_request.user.pk == viewer.pk
    assert len(ctx.captured_queries) == 3  # session (+ the manager's row, unused), the viewer, the audit head
    SignInSession.objects.filter(session_key=client.cookies["sessionid"].value).update(user_id=None)
    response = client.get("/marks/")
    assert response.status_code == 200 and response.wsgi_request.user.pk == viewer.pk


@pytest.mark.django_db
def test_the_migration_copies_signed_in_sessions_with_their_users(viewer):
    """Sessions of Django's own table that have not expired are copied, each naming its user."""
    import datetime as dt
    from importlib import import_module

    from django.apps import apps
    from django.contrib.sessions.backends.db import SessionStore as DjangoStore
    from django.contrib.sessions.models import Session
    from django.utils import timezone

    old = DjangoStore()
    old[SESSION_KEY] = str(viewer.pk)
    old.create()
    anonymous = DjangoStore()
    anonymous["seen"] = 1
    anonymous.create()
    expired = DjangoStore()
    expired[SESSION_KEY] = str(viewer.pk)
    expired.create()
    Session.objects.filter(session_key=expired.session_key).update(expire_date=timezone.now() - dt.timedelta(days=1))

    migration = import_module("registry.sessions.migrations.0001_signin_sessions")

    class _Editor:
        class connection:  # noqa: N801 - the attribute the migration reads
            alias = "default"

    SignInSession.objects.all().delete()
    migration.copy_sessions(apps, _Editor)
    copied = {s.session_key: s for s in SignInSession.objects.all()}
    assert set(copied) == {old.session_key, anonymous.session_key}
    assert copied[old.session_key].user_id == viewer.pk and copied[anonymous.session_key].user_id is None
    assert copied[old.session_key].get_decoded()[SESSION_KEY] == str(viewer.pk)


@pytest.mark.django_db
def test_clearsessions_removes_the_expired_sessions_of_the_new_table_only(client, viewer, manager):
    """``manage.py clearsessions`` (run by the nightly backup unit) works on the table the engine uses."""
    import datetime as dt

    from django.core.management import call_command
    from django.utils import timezone

    client.force_login(viewer)
    live = _row(client)
    other = type(client)()
    other.force_login(manager)
    expired = _row(other)
    SignInSession.objects.filter(pk=expired.pk).update(expire_date=timezone.now() - dt.timedelta(days=1))
    call_command("clearsessions")
    assert list(SignInSession.objects.values_list("session_key", flat=True)) == [live.session_key]
    assert client.get(NEAR).status_code == 200
