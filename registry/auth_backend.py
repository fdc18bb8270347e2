"""Django's model backend, reading a user's permissions in one query instead of two.

``ModelBackend.get_all_permissions`` reads the user's own permissions and those of their groups in
two queries, on every request that checks a role (every page and API call). Here one query reads
both; the answer, its per-request cache on the user (``_perm_cache``) and every other behaviour
(inactive users have none, superusers have all) are Django's own.

Django's ``ModelBackend`` stays listed after it (``AUTHENTICATION_BACKENDS``) so that sessions signed in
before this backend existed stay valid; this backend's answer is final (a permission it does not grant
raises ``PermissionDenied``, which ends Django's search), so the other is never asked again.
"""

from __future__ import annotations

from django.contrib.auth.backends import ModelBackend
from django.contrib.auth.models import Permission
from django.core.exceptions import PermissionDenied
from django.db.models import Q


class RegistryModelBackend(ModelBackend):
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
