"""User and role changes (review S-5): admin only, one transaction, one audit row, no lock-out."""

from __future__ import annotations

import pytest
from django.contrib.auth import get_user_model
from django.core.exceptions import ValidationError

from registry.errors import NotFound, PermissionDeniedError
from registry.models import AuditEvent
from registry.roles import Ability, has_ability, role_names
from registry.services.users import user_create, user_set_roles

pytestmark = pytest.mark.django_db


def codes_of(exc: ValidationError) -> dict[str, list[str]]:
    return {field: [e.code for e in errors] for field, errors in exc.error_dict.items()}


@pytest.fixture
def ada(make_user):
    return make_user("ada", "admin")


def test_set_roles_changes_groups_and_writes_one_audit_row(ada, viewer):
    assert not has_ability(viewer, Ability.MANAGE)
    user_set_roles(actor=ada, username="vera", roles=["manager", "viewer"], note="new party chief")
    viewer = get_user_model().objects.get(pk=viewer.pk)  # fresh permission cache
    assert role_names(viewer) == ["viewer", "manager"]
    assert has_ability(viewer, Ability.MANAGE)
    (event,) = AuditEvent.objects.filter(action="user_set_roles")
    assert (event.actor, event.object_type, event.object_id) == (ada, "user", str(viewer.pk))
    assert event.before == {"username": "vera", "roles": ["viewer"]}
    assert event.after == {"username": "vera", "roles": ["viewer", "manager"]}
    assert event.note == "new party chief"
    assert event.mark is None


@pytest.mark.parametrize("role", ["viewer", "technician", "manager", "signatory", None])
def test_only_an_admin_may_change_roles(make_user, viewer, role):
    actor = make_user("someone", role)
    with pytest.raises(PermissionDeniedError):
        user_set_roles(actor=actor, username="vera", roles=["manager"])
    assert role_names(viewer) == ["viewer"]
    assert not AuditEvent.objects.exists()


def test_a_superuser_may_change_roles(viewer, django_user_model):
    root = django_user_model.objects.create_superuser("root", password="x")
    user_set_roles(actor=root, username="vera", roles=["technician"])
    assert role_names(viewer) == ["technician"]


@pytest.mark.parametrize(
    ("roles", "code"),
    [(["chief"], "unknown_role"), ("manager", "invalid_type"), (["viewer"], "roles_unchanged")],
)
def test_bad_or_empty_changes_are_refused_and_change_nothing(ada, viewer, roles, code):
    with pytest.raises(ValidationError) as info:
        user_set_roles(actor=ada, username="vera", roles=roles)
    assert codes_of(info.value) == {"roles": [code]}
    assert role_names(viewer) == ["viewer"]
    assert not AuditEvent.objects.exists()


@pytest.mark.parametrize("username", ["nobody", "", None, "ve\x00ra"])
def test_unknown_user(ada, username):
    with pytest.raises(NotFound):
        user_set_roles(actor=ada, username=username, roles=["viewer"])


def test_the_last_active_admin_cannot_be_removed(ada, make_user):
    with pytest.raises(ValidationError) as info:
        user_set_roles(actor=ada, username="ada", roles=["viewer"])
    assert codes_of(info.value) == {"roles": ["last_admin"]}
    assert role_names(ada) == ["admin"]  # rolled back
    assert not AuditEvent.objects.exists()
    make_user("bo", "admin")
    user_set_roles(actor=ada, username="ada", roles=["viewer"])  # another admin remains
    assert role_names(ada) == ["viewer"]


def test_taking_every_role_away_keeps_the_account_but_it_reads_nothing(ada, viewer):
    user_set_roles(actor=ada, username="vera", roles=[])
    viewer = get_user_model().objects.get(pk=viewer.pk)
    assert viewer.is_active and not has_ability(viewer, Ability.VIEW)


def test_create_user_with_roles_and_no_password(ada):
    user = user_create(actor=ada, username="tomas", roles=["technician"], email="tomas@example.invalid")
    assert role_names(user) == ["technician"] and not user.has_usable_password()
    (event,) = AuditEvent.objects.filter(action="user_create")
    assert event.after["roles"] == ["technician"] and event.after["password_set"] is False
    assert "password" not in event.after


def test_create_user_password_is_validated_and_never_audited(ada):
    with pytest.raises(ValidationError) as info:
        user_create(actor=ada, username="tomas", roles=[], password="123")
    assert "password" in info.value.error_dict
    user = user_create(actor=ada, username="tomas", roles=["viewer"], password="Quarry-lens-47-ridge")
    assert user.check_password("Quarry-lens-47-ridge")
    assert "Quarry" not in str(AuditEvent.objects.get(action="user_create").after)


@pytest.mark.parametrize(
    ("kwargs", "field", "code"),
    [
        ({"username": "vera"}, "username", "unique"),
        ({"username": "bad name!"}, "username", "invalid"),
        ({"username": ""}, "username", "required"),
        ({"username": "ok", "email": "not-an-email"}, "email", "invalid"),
    ],
)
def test_create_user_bad_input(ada, viewer, kwargs, field, code):
    n = get_user_model().objects.count()
    with pytest.raises(ValidationError) as info:
        user_create(actor=ada, roles=["viewer"], **kwargs)
    assert code in codes_of(info.value)[field]
    assert get_user_model().objects.count() == n and not AuditEvent.objects.exists()


def test_create_user_needs_admin(manager):
    with pytest.raises(PermissionDeniedError):
        user_create(actor=manager, username="tomas", roles=["admin"])


# ----------------------------------------------------------------------------- user_set_active


def test_deactivate_and_reactivate_with_one_audit_row_each(ada, viewer, client):
    from registry.services.users import user_set_active

    client.force_login(viewer)
    assert client.get("/marks/").status_code == 200
    user_set_active(actor=ada, username="vera", active=False, note="left the office")
    viewer.refresh_from_db()
    assert not viewer.is_active and role_names(viewer) == ["viewer"]  # roles kept
    # The open session no longer authenticates (Django's ModelBackend refuses inactive users),
    # nor does the API token (DRF's TokenAuthentication refuses inactive users).
    assert client.get("/marks/").status_code == 302
    from rest_framework.authtoken.models import Token

    token = Token.objects.create(user=viewer)
    assert client.get("/api/marks/", HTTP_AUTHORIZATION=f"Token {token.key}").status_code == 401
    (event,) = AuditEvent.objects.filter(action="user_set_active")
    assert (event.actor, event.object_type, event.object_id, event.note) == (
        ada,
        "user",
        str(viewer.pk),
        "left the office",
    )
    assert event.before == {"username": "vera", "is_active": True}
    assert event.after == {"username": "vera", "is_active": False}
    user_set_active(actor=ada, username="vera", active=True, note="back for the field season")
    viewer.refresh_from_db()
    assert viewer.is_active
    assert client.get("/api/marks/", HTTP_AUTHORIZATION=f"Token {token.key}").status_code == 200
    assert [e.after["is_active"] for e in AuditEvent.objects.filter(action="user_set_active").order_by("id")] == [
        False,
        True,
    ]


@pytest.mark.parametrize(
    ("kwargs", "field", "code"),
    [
        ({"username": "vera", "active": True, "note": "x"}, "active", "active_unchanged"),
        ({"username": "vera", "active": "no", "note": "x"}, "active", "invalid_type"),
        ({"username": "vera", "active": False, "note": "  "}, "note", "required"),
        ({"username": "ada", "active": False, "note": "x"}, "username", "self_deactivation"),
    ],
)
def test_set_active_refusals_change_nothing(ada, viewer, kwargs, field, code):
    from registry.services.users import user_set_active

    with pytest.raises(ValidationError) as info:
        user_set_active(actor=ada, **kwargs)
    assert codes_of(info.value) == {field: [code]}
    ada.refresh_from_db()
    viewer.refresh_from_db()
    assert ada.is_active and viewer.is_active
    assert not AuditEvent.objects.exists()


def test_set_active_needs_admin_and_an_existing_user(ada, manager, viewer):
    from registry.services.users import user_set_active

    with pytest.raises(PermissionDeniedError):
        user_set_active(actor=manager, username="vera", active=False, note="x")
    with pytest.raises(NotFound):
        user_set_active(actor=ada, username="nobody", active=False, note="x")
    viewer.refresh_from_db()
    assert viewer.is_active and not AuditEvent.objects.exists()


def test_the_last_active_admin_cannot_be_deactivated(ada, make_user, django_user_model):
    """An actor holding the administer permission directly (no admin role) tries to deactivate the only admin."""
    from django.contrib.auth.models import Permission

    from registry.services.users import user_set_active

    helper = make_user("hal", None)
    helper.user_permissions.add(Permission.objects.get(codename=Ability.ADMINISTER.value))
    helper = django_user_model.objects.get(pk=helper.pk)  # fresh permission cache
    assert has_ability(helper, Ability.ADMINISTER)
    with pytest.raises(ValidationError) as info:
        user_set_active(actor=helper, username="ada", active=False, note="x")
    assert codes_of(info.value) == {"active": ["last_admin"]}
    ada.refresh_from_db()
    assert ada.is_active and not AuditEvent.objects.exists()  # rolled back
    make_user("bo", "admin")
    user_set_active(actor=helper, username="ada", active=False, note="another admin remains")
    ada.refresh_from_db()
    assert not ada.is_active
