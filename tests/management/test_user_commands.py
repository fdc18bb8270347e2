"""``set_roles`` / ``create_user`` commands and the django-admin site (review S-5)."""

from __future__ import annotations

import pytest
from django.core.management import CommandError, call_command
from django.urls import reverse

from registry.models import AuditEvent
from registry.roles import role_names
from tests.test_settings import PROD, run_python

pytestmark = pytest.mark.django_db


@pytest.fixture(autouse=True)
def fast_hashing(settings):
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]


@pytest.fixture
def ada(make_user):
    return make_user("ada", "admin")


def test_set_roles_command(ada, viewer, capsys):
    call_command("set_roles", "vera", "technician", "viewer", "--as", "ada", "--note", "field season")
    assert "vera now has: technician, viewer" in capsys.readouterr().out
    assert role_names(viewer) == ["viewer", "technician"]
    event = AuditEvent.objects.get(action="user_set_roles")
    assert event.actor == ada and event.note == "field season"


def test_set_roles_none(ada, viewer):
    call_command("set_roles", "vera", "--none", "--as", "ada")
    assert role_names(viewer) == []


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["vera", "chief", "--as", "ada"], "Unknown role 'chief'"),
        (["vera", "manager", "--as", "vera"], "does not allow you to administer"),
        (["vera", "manager", "--as", "ghost"], "no user named 'ghost'"),
        (["ghost", "manager", "--as", "ada"], "No user named 'ghost'"),
        (["vera", "--as", "ada"], "give one or more roles, or --none"),
        (["vera", "viewer", "--none", "--as", "ada"], "give one or more roles, or --none"),
    ],
)
def test_set_roles_refusals_change_nothing(ada, viewer, args, message):
    with pytest.raises(CommandError, match=message):
        call_command("set_roles", *args)
    assert role_names(viewer) == ["viewer"]
    assert not AuditEvent.objects.exists()


def test_create_user_command(ada, capsys, django_user_model):
    call_command("create_user", "tomas", "--role", "technician", "--as", "ada", "--first-name", "Tomas")
    assert "changepassword tomas" in capsys.readouterr().out
    user = django_user_model.objects.get(username="tomas")
    assert role_names(user) == ["technician"] and user.first_name == "Tomas"
    assert AuditEvent.objects.get(action="user_create").actor == ada


def test_create_user_command_refused_for_a_manager(manager, django_user_model):
    with pytest.raises(CommandError, match="does not allow you to administer"):
        call_command("create_user", "tomas", "--role", "admin", "--as", "mona")
    assert not django_user_model.objects.filter(username="tomas").exists()


def test_development_admin_site_is_read_only(client, django_user_model, viewer):
    root = django_user_model.objects.create_superuser("root", password="x")
    client.force_login(root)
    change = reverse("admin:auth_user_change", args=[viewer.pk])
    assert client.get(reverse("admin:auth_user_changelist")).status_code == 200
    assert client.get(reverse("admin:auth_user_add")).status_code == 403
    response = client.post(change, {"username": "renamed", "groups": []})
    assert response.status_code == 403
    viewer.refresh_from_db()
    assert viewer.username == "vera"
    assert client.post(reverse("admin:auth_group_add"), {"name": "x"}).status_code == 403


def test_production_does_not_mount_the_admin_site():
    code = (
        "import django; django.setup()\n"
        "from django.urls import resolve, Resolver404\n"
        "try:\n    resolve('/django-admin/'); print('mounted')\n"
        "except Resolver404:\n    print('absent')\n"
    )
    production = run_python(["-c", code], **PROD)
    development = run_python(["-c", code])
    assert production.stdout.strip().splitlines()[-1] == "absent", production.stderr
    assert development.stdout.strip().splitlines()[-1] == "mounted", development.stderr


def test_set_active_command_off_and_on(ada, viewer, capsys):
    call_command("set_active", "vera", "--off", "--as", "ada", "--note", "left the office")
    assert "vera is now inactive: cannot sign in" in capsys.readouterr().out
    viewer.refresh_from_db()
    assert not viewer.is_active
    event = AuditEvent.objects.get(action="user_set_active")
    assert event.actor == ada and event.note == "left the office" and event.after["is_active"] is False
    call_command("set_active", "vera", "--on", "--as", "ada", "--note", "back")
    viewer.refresh_from_db()
    assert viewer.is_active and AuditEvent.objects.filter(action="user_set_active").count() == 2


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["vera", "--off", "--as", "vera", "--note", "x"], "does not allow you to administer"),
        (["vera", "--off", "--as", "ghost", "--note", "x"], "no user named 'ghost'"),
        (["ghost", "--off", "--as", "ada", "--note", "x"], "No user named 'ghost'"),
        (["ada", "--off", "--as", "ada", "--note", "x"], "cannot deactivate your own account"),
        (["vera", "--on", "--as", "ada", "--note", "x"], "vera is already active"),
        (["vera", "--off", "--as", "ada", "--note", " "], "Give the reason"),
        (["vera", "--as", "ada", "--note", "x"], "one of the arguments --off --on is required"),
        (["vera", "--off", "--on", "--as", "ada", "--note", "x"], "not allowed with argument"),
        (["vera", "--off", "--as", "ada"], "the following arguments are required: --note"),
    ],
)
def test_set_active_refusals_change_nothing(ada, viewer, args, message):
    with pytest.raises(CommandError, match=message):
        call_command("set_active", *args)
    viewer.refresh_from_db()
    ada.refresh_from_db()
    assert viewer.is_active and ada.is_active
    assert not AuditEvent.objects.exists()
