"""Django's model backend, reading a signed-in user, their roles and their permissions in one query.

Django's ``ModelBackend`` reads the user of a session in one query, their own permissions and those of
their groups in two more on every request that checks a role (every page and API call), and the page's
role names (``registry.roles.role_names``) in another. Here:

- :meth:`RegistryModelBackend.get_user` (the session's user, on every signed-in request) reads the user's
  row, the names of their groups and their permissions in one query, and leaves the permissions on the
  user as Django's per-request cache (``_perm_cache``) and the group names beside them
  (``_registry_group_names``, shown by the page header);
- :meth:`RegistryModelBackend.get_all_permissions` reads the permissions of any other user object in one
  query.

The answers and every other behaviour (inactive users have none, superusers have all, a user who
cannot sign in gets no session) are Django's own. Nothing is kept between requests: a role taken away
counts from the next request on.

Django's ``ModelBackend`` stays listed after it (``AUTHENTICATION_BACKENDS``) so that sessions signed in
before this backend existed stay valid; this backend's answer is final (a permission it does not grant
raises ``PermissionDenied``, which ends Django's search), so the other is never asked again.
"""

from __future__ import annotations

from django.contrib.auth import get_user_model
from django.contrib.auth.backends import ModelBackend
from django.contrib.auth.models import Permission
from django.core.exceptions import PermissionDenied
from django.db import connections, router
from django.db.models import Q

#: Separates the names in the aggregated columns (ASCII unit separator: in no group name or codename).
_SEP = "\x1f"


def _user_sql(vendor: str) -> tuple[str, str]:
    """The query of :meth:`RegistryModelBackend.get_user` and its text aggregate for ``vendor``."""
    User = get_user_model()
    cols = ", ".join(f'u."{f.column}"' for f in User._meta.concrete_fields)
    agg = "string_agg({x}, chr(31))" if vendor == "postgresql" else "group_concat({x}, char(31))"
    user_table = User._meta.db_table
    groups_m2m = User.groups.through._meta.db_table
    perms_m2m = User.user_permissions.through._meta.db_table
    # The group names, and the permissions held directly or through a group, as one text each.
    groups = f"""(SELECT {agg.format(x="g.name")} FROM auth_group g
                 JOIN "{groups_m2m}" ug ON ug.group_id = g.id WHERE ug.user_id = u.id)"""
    perms = f"""(SELECT {agg.format(x="t.perm")} FROM (
                   SELECT DISTINCT ct.app_label || '.' || p.codename AS perm
                   FROM auth_permission p JOIN django_content_type ct ON ct.id = p.content_type_id
                   WHERE p.id IN (SELECT up.permission_id FROM "{perms_m2m}" up WHERE up.user_id = u.id)
                      OR p.id IN (SELECT gp.permission_id FROM auth_group_permissions gp
                                  JOIN "{groups_m2m}" ug2 ON ug2.group_id = gp.group_id
                                  WHERE ug2.user_id = u.id)) t)"""
    return (
        f'SELECT {cols}, {groups} AS registry_groups, {perms} AS registry_perms FROM "{user_table}" u WHERE u.id = %s'
    )


_SQL_CACHE: dict[str, str] = {}


def _split(text: str | None) -> list[str]:
    return [] if not text else text.split(_SEP)


class RegistryModelBackend(ModelBackend):
    def get_user(self, user_id):
        User = get_user_model()
        alias = router.db_for_read(User)
        vendor = connections[alias].vendor
        sql = _SQL_CACHE.get(vendor)
        if sql is None:
            sql = _SQL_CACHE[vendor] = _user_sql(vendor)
        try:
            pk = User._meta.pk.to_python(user_id)
        except Exception:  # a session naming no valid key: no user, as Django's backend answers
            return None
        found = list(User._default_manager.db_manager(alias).raw(sql, [pk]))
        if not found:
            return None
        user = found[0]
        groups, perms = user.registry_groups, user.registry_perms
        del user.registry_groups, user.registry_perms
        user._registry_group_names = frozenset(_split(groups))
        if user.is_active and not user.is_superuser:
            user._perm_cache = set(_split(perms))  # Django's per-request cache of get_all_permissions
        return user if self.user_can_authenticate(user) else None

    def get_all_permissions(self, user_obj, obj=None):
        if not user_obj.is_active or user_obj.is_anonymous or obj is not None:
            return set()
        if not hasattr(user_obj, "_perm_cache"):
            if user_obj.is_superuser:
                perms = Permission.objects.all()
            else:
                perms = Permission.objects.filter(Q(user=user_obj) | Q(group__user=user_obj))
            rows = perms.values_list("content_type__app_label", "codename").order_by().distinct()
            user_obj._perm_cache = {f"{app}.{codename}" for app, codename in rows}
        return user_obj._perm_cache

    def has_perm(self, user_obj, perm, obj=None):
        if user_obj.is_active and perm in self.get_all_permissions(user_obj, obj=obj):
            return True
        raise PermissionDenied  # final: Django's ModelBackend after this one would only read the same rows again
