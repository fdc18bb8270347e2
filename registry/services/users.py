"""Writes on user accounts: create a user, set a user's roles, deactivate or reactivate a user
(admin ability, audited).

Roles are Django groups (:mod:`registry.roles`). Giving someone the manager role lets them publish
positions, so a role change is a write like any other: one transaction, a role check, validation and
an audit row (``user_create``, ``user_set_roles``, ``user_set_active``) with the values before and
after. Passwords never appear in the audit trail. Accounts are never deleted (the audit trail refers
to them); a deactivated account cannot sign in or use its API token.

The change is refused when it would leave the registry without an active administrator (a user in
the admin group, or a superuser), so an admin cannot lock the office out by mistake.
"""

from __future__ import annotations

from collections.abc import Iterable

from django.contrib.auth import get_user_model, password_validation
from django.contrib.auth.models import AbstractUser, Group
from django.core.exceptions import ValidationError
from django.core.validators import validate_email
from django.db import transaction

from registry.errors import NotFound
from registry.roles import Ability, Role, ensure_roles, role_names
from registry.services.access import require_ability
from registry.services.audit import audit_record


def _parse_roles(roles: Iterable[str]) -> list[str]:
    if isinstance(roles, str) or not isinstance(roles, Iterable):
        raise ValidationError({"roles": ValidationError("Give a list of roles.", code="invalid_type")})
    wanted = []
    for role in roles:
        name = str(role).strip().lower()
        if name not in {r.value for r in Role}:
            raise ValidationError(
                {
                    "roles": ValidationError(
                        "Unknown role %(value)r; the roles are %(known)s.",
                        code="unknown_role",
                        params={"value": str(role), "known": ", ".join(r.value for r in Role)},
                    )
                }
            )
        if name not in wanted:
            wanted.append(name)
    # Keep the order of registry.roles.Role, so audit rows compare cleanly.
    return [r.value for r in Role if r.value in wanted]


def _access_user(username) -> AbstractUser:
    User = get_user_model()
    if not isinstance(username, str) or not username.strip() or "\x00" in username:
        raise NotFound(f"No user named {username!r}.", details={"username": str(username)})
    try:
        return User.objects.select_for_update().get(username=username.strip())
    except User.DoesNotExist:
        raise NotFound(f"No user named {username!r}.", details={"username": username}) from None


def _active_admins_exist() -> bool:
    User = get_user_model()
    return (
        User.objects.filter(is_active=True, is_superuser=True).exists()
        or User.objects.filter(is_active=True, groups__name=Role.ADMIN.value).exists()
    )


def _apply_roles(user, roles: list[str]) -> None:
    ensure_roles()
    user.groups.set(Group.objects.filter(name__in=roles))


def user_set_roles(*, actor, username: str, roles: Iterable[str], note: str = ""):
    """Replace the roles of ``username`` with ``roles`` (admin ability; audited).

    Parameters
    ----------
    actor
        The administrator making the change (ability ADMINISTER).
    username
        The account to change.
    roles
        Role names from :class:`registry.roles.Role`; an empty list takes every role away (the
        account stays, but can read nothing).
    note
        Optional reason, stored with the audit row.

    Returns
    -------
    User
        The changed user.

    Raises
    ------
    PermissionDeniedError
        ``actor`` lacks the ADMINISTER ability.
    NotFound
        No such user.
    ValidationError
        ``unknown_role``; ``roles_unchanged`` (nothing to do, nothing written); ``last_admin`` (the
        change would leave no active administrator).
    """
    require_ability(actor, Ability.ADMINISTER)
    wanted = _parse_roles(roles)
    with transaction.atomic():
        user = _access_user(username)
        before = role_names(user)
        if before == wanted:
            raise ValidationError(
                {"roles": ValidationError("%(user)s already has exactly these roles.", code="roles_unchanged",
                                          params={"user": user.username})}
            )  # fmt: skip
        _apply_roles(user, wanted)
        if not _active_admins_exist():
            raise ValidationError(
                {
                    "roles": ValidationError(
                        "This would leave the registry without an active administrator.", code="last_admin"
                    )
                }
            )  # the transaction rolls back: nothing changed
        audit_record(
            actor=actor,
            action="user_set_roles",
            obj=user,
            before={"username": user.username, "roles": before},
            after={"username": user.username, "roles": wanted},
            note=note,
        )
    return user


def user_create(
    *,
    actor,
    username: str,
    roles: Iterable[str],
    email: str = "",
    first_name: str = "",
    last_name: str = "",
    password: str | None = None,
):
    """Create an account with ``roles`` (admin ability; audited).

    ``password=None`` creates the account without a usable password (set one with Django's
    ``changepassword`` command); a given password must pass the project's password validators.
    """
    require_ability(actor, Ability.ADMINISTER)
    User = get_user_model()
    wanted = _parse_roles(roles)
    username = (username or "").strip() if isinstance(username, str) else ""
    errors: dict[str, list[ValidationError]] = {}
    try:
        User._meta.get_field("username").run_validators(username)
        if not username:
            raise ValidationError("A user name is required.", code="required")
    except ValidationError as exc:
        errors["username"] = exc.error_list
    if email:
        try:
            validate_email(email)
        except ValidationError as exc:
            errors["email"] = exc.error_list
    candidate = User(username=username, email=email, first_name=first_name, last_name=last_name)
    if password is not None:
        try:
            password_validation.validate_password(password, user=candidate)
        except ValidationError as exc:
            errors["password"] = exc.error_list
    if errors:
        raise ValidationError(errors)
    with transaction.atomic():
        if User.objects.filter(username=username).exists():
            raise ValidationError(
                {
                    "username": ValidationError(
                        "A user named %(value)s exists.", code="unique", params={"value": username}
                    )
                }
            )
        if password is None:
            candidate.set_unusable_password()
        else:
            candidate.set_password(password)
        candidate.save()
        _apply_roles(candidate, wanted)
        audit_record(
            actor=actor,
            action="user_create",
            obj=candidate,
            after={
                "username": username,
                "email": email,
                "first_name": first_name,
                "last_name": last_name,
                "roles": wanted,
                "password_set": password is not None,
            },
        )
    return candidate


def _lock_active_admins() -> None:
    """Lock the rows of the active administrators (by id, in id order) until the transaction ends."""
    User = get_user_model()
    ids = set(User.objects.filter(is_active=True, is_superuser=True).values_list("pk", flat=True))
    ids |= set(User.objects.filter(is_active=True, groups__name=Role.ADMIN.value).values_list("pk", flat=True))
    list(User.objects.select_for_update().filter(pk__in=ids).order_by("pk").values_list("pk", flat=True))


def user_set_active(*, actor, username: str, active: bool, note: str):
    """Deactivate (``active=False``) or reactivate (``active=True``) an account (admin ability; audited).

    A deactivated account keeps its roles and its place in the audit trail, but can no longer sign in:
    Django's authentication backend refuses inactive users, so its open sessions and its API token stop
    working at the next request.

    Parameters
    ----------
    actor
        The administrator making the change (ability ADMINISTER).
    username
        The account to change.
    active
        The wanted state (a real bool).
    note
        The reason (required, stored with the audit row).

    Returns
    -------
    User
        The changed user.

    Raises
    ------
    PermissionDeniedError
        ``actor`` lacks the ADMINISTER ability.
    NotFound
        No such user.
    ValidationError
        ``invalid_type`` (``active`` is not a bool); ``required`` (no note); ``active_unchanged``
        (already in that state, nothing written); ``self_deactivation`` (an administrator cannot
        deactivate their own account); ``last_admin`` (no active administrator would remain).
    """
    require_ability(actor, Ability.ADMINISTER)
    if not isinstance(active, bool):
        raise ValidationError({"active": ValidationError("Give true or false.", code="invalid_type")})
    note = note.strip() if isinstance(note, str) else ""
    if not note:
        raise ValidationError(
            {"note": ValidationError("Give the reason; it is stored in the audit trail.", code="required")}
        )
    with transaction.atomic():
        _lock_active_admins()  # two admins deactivating each other at once: the second waits, then is refused
        user = _access_user(username)
        if user.is_active == active:
            raise ValidationError(
                {
                    "active": ValidationError(
                        "%(user)s is already %(state)s.",
                        code="active_unchanged",
                        params={"user": user.username, "state": "active" if active else "inactive"},
                    )
                }
            )
        if not active and user.pk == getattr(actor, "pk", None):
            raise ValidationError(
                {
                    "username": ValidationError(
                        "You cannot deactivate your own account; ask another administrator.",
                        code="self_deactivation",
                    )
                }
            )
        user.is_active = active
        user.save(update_fields=["is_active"])
        if not _active_admins_exist():
            raise ValidationError(
                {
                    "active": ValidationError(
                        "This would leave the registry without an active administrator.", code="last_admin"
                    )
                }
            )  # the transaction rolls back: nothing changed
        audit_record(
            actor=actor,
            action="user_set_active",
            obj=user,
            before={"username": user.username, "is_active": not active},
            after={"username": user.username, "is_active": active},
            note=note,
        )
    return user
