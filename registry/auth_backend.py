"""Django's model backend, reading a signed-in user, their roles and their permissions in one query.

Django's ``ModelBackend`` reads the user of a session in one query, their own permissions and those of
their groups in two more on every request that checks a role (every page and API call), and the page's
role names (``registry.roles.role_names``) in another. Here:

- :meth:`RegistryModelBackend.get_user` (the session's user, on every signed-in request) reads the user's
  row, the names of their groups and their permissions in one query, and leaves the permissions on the
  user as Django's per-request cache (``_perm_cache``) and the group names beside them
  (``_registry_group_names``, shown by the page header);
- :meth:`RegistryModelBackend.get_all_permissions` reads the permissions of any other user object in one
  query;
- the session engine (``registry.sessions``) reads the same columns (:func:`user_columns_sql`) joined to
  the session's row, so that a signed-in request costs one query for both; :class:`AuthenticationMiddleware`
  hands that user to :meth:`RegistryModelBackend.get_user` for the length of Django's ``get_user`` call,
  which takes it only when the session's data name that user (else it reads the user as above).

The answers and every other behaviour (inactive users have none, superusers have all, a user who
cannot sign in gets no session) are Django's own. Nothing is kept between requests: a role taken away
counts from the next request on.

Django's ``ModelBackend`` stays listed after it (``AUTHENTICATION_BACKENDS``) so that sessions signed in
before this backend existed stay valid; this backend's answer is final (a permission it does not grant
raises ``PermissionDenied``, which ends Django's search), so the other is never asked again.
"""

from __future__ import annotations

import contextvars
import weakref
from typing import Any

from django.contrib import auth
from django.contrib.auth import get_user_model
from django.contrib.auth.backends import ModelBackend
from django.contrib.auth.base_user import AbstractBaseUser
from django.contrib.auth.middleware import AuthenticationMiddleware as DjangoAuthenticationMiddleware
from django.contrib.auth.models import Permission
from django.core.exceptions import PermissionDenied
from django.db import connections, router
from django.db.models import Q
from django.db.models.sql import Query
from django.utils.functional import SimpleLazyObject

from registry import dbprepared

#: Separates the names in the aggregated columns (ASCII unit separator: in no group name or codename).
_SEP = "\x1f"


def user_columns_sql(vendor: str, user_alias: str = "u") -> str:
    """The select list of a signed-in user: the user's row, their group names and their permissions.

    ``user_alias`` names the user table in the query around it (:func:`user_from_row` reads the values
    back). The group names and the permissions held directly or through a group come as one text each.
    """
    User = get_user_model()
    u = user_alias
    cols = ", ".join(f'{u}."{f.column}"' for f in User._meta.concrete_fields)
    agg = "string_agg({x}, chr(31))" if vendor == "postgresql" else "group_concat({x}, char(31))"
    groups_m2m = User.groups.through._meta.db_table
    perms_m2m = User.user_permissions.through._meta.db_table
    groups = f"""(SELECT {agg.format(x="g.name")} FROM auth_group g
                 JOIN "{groups_m2m}" ug ON ug.group_id = g.id WHERE ug.user_id = {u}.id)"""
    perms = f"""(SELECT {agg.format(x="t.perm")} FROM (
                   SELECT DISTINCT ct.app_label || '.' || p.codename AS perm
                   FROM auth_permission p JOIN django_content_type ct ON ct.id = p.content_type_id
                   WHERE p.id IN (SELECT up.permission_id FROM "{perms_m2m}" up WHERE up.user_id = {u}.id)
                      OR p.id IN (SELECT gp.permission_id FROM auth_group_permissions gp
                                  JOIN "{groups_m2m}" ug2 ON ug2.group_id = gp.group_id
                                  WHERE ug2.user_id = {u}.id)) t)"""
    return f"{cols}, {groups}, {perms}"


def user_column_count() -> int:
    """How many values :func:`user_columns_sql` selects."""
    return len(get_user_model()._meta.concrete_fields) + 2


def user_from_row(alias: str, values) -> AbstractBaseUser | None:
    """The user of the values :func:`user_columns_sql` selected (None for a row of nulls: no such user).

    The permissions are left on the user as Django's per-request cache (``_perm_cache``), the group
    names beside them (``_registry_group_names``, shown by the page header); the user object lives as
    long as the request does.
    """
    User = get_user_model()
    *fields, groups, perms = values
    if fields[_pk_index()] is None:
        return None
    fields = _converted(alias, fields)
    user = User.from_db(alias, None, fields)
    user._registry_group_names = frozenset(_split(groups))
    if user.is_active and not user.is_superuser:
        user._perm_cache = set(_split(perms))  # Django's per-request cache of get_all_permissions
    return user


def _pk_index() -> int:
    User = get_user_model()
    return [f.attname for f in User._meta.concrete_fields].index(User._meta.pk.attname)


#: The database's and the fields' value converters of the user's columns, per connection (as Django's
#: ``raw()`` applies them: SQLite gives dates as text); weak, so that a closed connection takes its own.
_CONVERTERS: weakref.WeakKeyDictionary[Any, dict] = weakref.WeakKeyDictionary()


def _converted(alias: str, fields: list) -> list:
    conn = connections[alias]
    converters = _CONVERTERS.get(conn)
    if converters is None:
        User = get_user_model()
        compiler = conn.ops.compiler("SQLCompiler")(Query(User), conn, alias)
        table = User._meta.db_table
        converters = _CONVERTERS[conn] = compiler.get_converters([f.get_col(table) for f in User._meta.concrete_fields])
    if not converters:
        return fields
    for i, (funcs, expression) in converters.items():
        for func in funcs:
            fields[i] = func(fields[i], expression, conn)
    return fields


def _user_sql(vendor: str) -> str:
    """The query of :meth:`RegistryModelBackend.get_user` for ``vendor``."""
    return f'SELECT {user_columns_sql(vendor)} FROM "{get_user_model()._meta.db_table}" u WHERE u.id = %s'


_SQL_CACHE: dict[str, str] = {}


def _split(text: str | None) -> list[str]:
    return [] if not text else text.split(_SEP)


#: The session store of the request whose user :func:`django.contrib.auth.get_user` is reading, set by
#: :class:`AuthenticationMiddleware` for the length of that call only (never across requests).
_reading_session: contextvars.ContextVar[Any] = contextvars.ContextVar("registry_reading_session", default=None)


class AuthenticationMiddleware(DjangoAuthenticationMiddleware):
    """Django's, with the user read together with the session when the session engine did so.

    ``request.user`` is Django's own :func:`django.contrib.auth.get_user` (which backend, the session's
    password hash, sign-out on a mismatch: all Django's); only the backend's ``get_user`` takes the
    user row that :mod:`registry.sessions` read in the session's query instead of a second query.
    """

    def process_request(self, request):
        super().process_request(request)
        request.user = SimpleLazyObject(lambda: _get_user(request))


def _get_user(request):
    if not hasattr(request, "_cached_user"):
        token = _reading_session.set(request.session)
        try:
            request._cached_user = auth.get_user(request)
        finally:
            _reading_session.reset(token)
    return request._cached_user


class RegistryModelBackend(ModelBackend):
    def get_user(self, user_id):
        User = get_user_model()
        try:
            pk = User._meta.pk.to_python(user_id)
        except Exception:  # a session naming no valid key: no user, as Django's backend answers
            return None
        session = _reading_session.get()
        read = getattr(session, "user_read_with_session", None)
        if read is not None and read[0] == pk:
            user = read[1]  # read a moment ago, in this request, with the session naming this user
        else:
            alias = router.db_for_read(User)
            conn = connections[alias]
            sql = _SQL_CACHE.get(conn.vendor)
            if sql is None:
                sql = _SQL_CACHE[conn.vendor] = _user_sql(conn.vendor)
            row = dbprepared.fetchone(conn, "registry_user_with_roles", sql, [pk])
            user = None if row is None else user_from_row(alias, row)
        return user if user is not None and self.user_can_authenticate(user) else None

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
