"""Sign-in throttle (issue 11, "Edges" 1): wrong guesses are counted per account and per address,
audited, and refused past the limit with a plain "try again in N minutes"; admins can unlock.

Limits are the documented defaults (5 per account, 20 per address, 15 minutes; README).
"""

from __future__ import annotations

import datetime as dt
import io

import pytest
from django.core.management import CommandError, call_command
from django.utils import timezone

from registry.errors import PermissionDeniedError
from registry.models import AuditEvent, SigninThrottle
from registry.services.signin import signin_unlock

pytestmark = pytest.mark.django_db
RIGHT = "pw-mona-123!"  # conftest's password for the manager fixture


@pytest.fixture(autouse=True)
def _fast_hasher(settings):
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]


def _signin(client, username, password, address="192.0.2.10"):  # 192.0.2.0/24: documentation range (RFC 5737)
    return client.post("/signin/", {"username": username, "password": password}, REMOTE_ADDR=address)


def test_n_wrong_guesses_then_even_the_right_password_is_refused(client, manager):
    for i in range(5):
        r = _signin(client, "mona", f"wrong-{i}")
        assert r.status_code == 200, i  # the form again, "wrong user name or password"
    r = _signin(client, "mona", RIGHT)
    assert r.status_code == 429
    body = r.content.decode()
    assert "Too many failed sign-ins for this account" in body and "try again in 15 minutes" in body
    assert int(r["Retry-After"]) in range(880, 901)
    assert "_auth_user_id" not in client.session  # not signed in
    failed = AuditEvent.objects.filter(action="signin_failed")
    assert failed.count() == 5  # the refused attempt was not checked, and not audited again
    assert failed.first().after["address"] == "192.0.2.10" and failed.first().object_type == "user"
    assert AuditEvent.objects.filter(action="signin_locked").count() == 1


def test_the_user_is_warned_before_the_pause(client, manager):
    for i in range(3):
        r = _signin(client, "mona", f"wrong-{i}")
    assert "2 more failed attempts and sign-in to this account is paused" in r.content.decode()


def test_case_variants_share_one_count_and_unknown_names_are_counted(client, manager):
    for name in ("mona", "Mona", "MONA", "mOna", "monA"):
        _signin(client, name, "wrong")
    assert _signin(client, "mona", RIGHT).status_code == 429
    _signin(client, "nobody-here", "wrong")
    last = AuditEvent.objects.filter(action="signin_failed").order_by("-seq").first()
    assert last.object_type == "signinthrottle" and last.after["username"] == "nobody-here"


def test_many_accounts_from_one_address_pause_that_address(client, manager, make_user):
    for i in range(20):
        _signin(client, f"guess{i}", "wrong", address="198.51.100.7")
    r = _signin(client, "mona", RIGHT, address="198.51.100.7")
    assert r.status_code == 429 and "from your network address" in r.content.decode()
    assert _signin(client, "mona", RIGHT, address="203.0.113.5").status_code == 302  # elsewhere: fine


def test_the_pause_ends_by_itself_and_success_clears_the_count(client, manager):
    for i in range(5):
        _signin(client, "mona", f"wrong-{i}")
    SigninThrottle.objects.filter(key="account:mona").update(locked_until=timezone.now() - dt.timedelta(seconds=1))
    assert _signin(client, "mona", RIGHT).status_code == 302
    assert not SigninThrottle.objects.filter(key="account:mona").exists()


def test_proxy_header_names_the_address(client, manager, settings):
    settings.REGISTRY = {**settings.REGISTRY, "CLIENT_IP_HEADER": "HTTP_X_REAL_IP"}
    client.post(
        "/signin/", {"username": "mona", "password": "x"}, REMOTE_ADDR="127.0.0.1", HTTP_X_REAL_IP="203.0.113.9"
    )
    assert SigninThrottle.objects.filter(key="address:203.0.113.9").exists()


def test_admin_unlocks_with_a_note_audited(client, manager, admin_user_role, viewer):
    for i in range(5):
        _signin(client, "mona", f"wrong-{i}")
    with pytest.raises(PermissionDeniedError):
        signin_unlock(actor=viewer, username="mona", note="please")
    with pytest.raises(CommandError, match="Give the reason"):
        call_command("unlock_signin", "mona", "--as", "ada", stdout=io.StringIO())
    out = io.StringIO()
    call_command("unlock_signin", "--list", stdout=out)
    assert "account mona: paused after 5 failed sign-ins" in out.getvalue()
    out = io.StringIO()
    call_command("unlock_signin", "mona", "--as", "ada", "--note", "called the office", stdout=out)
    assert "Unlocked account mona" in out.getvalue()
    event = AuditEvent.objects.get(action="signin_unlock")
    assert event.actor == admin_user_role and event.note == "called the office" and event.before["failures"] == 5
    assert _signin(client, "mona", RIGHT).status_code == 302
