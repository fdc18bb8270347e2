"""Roles (viewer, technician, manager, signatory, admin) as Django groups, and the permissions each one holds.

A user's abilities are the union over their groups. Superusers hold all.
The groups and their permissions are created by migration 0004 and re-asserted
by ``ensure_roles()`` (used by ``load_demo`` and tests).
"""

from __future__ import annotations

from enum import StrEnum


class Role(StrEnum):
    VIEWER = "viewer"
    TECHNICIAN = "technician"
    MANAGER = "manager"
    SIGNATORY = "signatory"
    ADMIN = "admin"


class Ability(StrEnum):
    """Custom permissions declared on ``Mark.Meta.permissions`` (app label ``registry``)."""

    VIEW = "view_registry"
    RECORD = "record_fieldwork"
    MANAGE = "manage_marks"
    SIGN = "sign_documents"
    ADMINISTER = "administer_registry"


ROLE_ABILITIES: dict[Role, frozenset[Ability]] = {
    Role.VIEWER: frozenset({Ability.VIEW}),
    Role.TECHNICIAN: frozenset({Ability.VIEW, Ability.RECORD}),
    Role.MANAGER: frozenset({Ability.VIEW, Ability.RECORD, Ability.MANAGE}),
    Role.SIGNATORY: frozenset({Ability.VIEW, Ability.SIGN}),
    Role.ADMIN: frozenset({Ability.VIEW, Ability.ADMINISTER}),
}


def has_ability(user, ability: Ability) -> bool:
    if user is None or not user.is_authenticated or not user.is_active:
        return False
    return user.has_perm(f"registry.{ability.value}")


def role_names(user, *, as_signed_in: bool = False) -> list[str]:
    """The user's roles, in the order of :class:`Role`.

    ``as_signed_in``: the group names read with the request's user when it was signed in
    (``registry.auth_backend``), if there are any, instead of a query; for showing, never for deciding.
    """
    if user is None or not user.is_authenticated:
        return []
    names = getattr(user, "_registry_group_names", None) if as_signed_in else None
    if names is None:
        names = set(user.groups.values_list("name", flat=True))
    return [r.value for r in Role if r.value in names]


def ensure_roles(apps=None) -> None:
    """Create the role groups with their permissions (idempotent)."""
    if apps is None:
        from django.contrib.auth.models import Group, Permission
        from django.contrib.contenttypes.models import ContentType

        from registry.models import Mark

        ct = ContentType.objects.get_for_model(Mark)
    else:  # inside a data migration
        Group = apps.get_model("auth", "Group")
        Permission = apps.get_model("auth", "Permission")
        ContentType = apps.get_model("contenttypes", "ContentType")
        ct, _ = ContentType.objects.get_or_create(app_label="registry", model="mark")
    from registry.models.marks import Mark as _MarkModel

    labels = dict(_MarkModel._meta.permissions)
    perms = {}
    for ability in Ability:
        perms[ability], _ = Permission.objects.get_or_create(
            content_type=ct, codename=ability.value, defaults={"name": labels[ability.value]}
        )
    for role, abilities in ROLE_ABILITIES.items():
        group, _ = Group.objects.get_or_create(name=role.value)
        group.permissions.set([perms[a] for a in abilities])
