"""Django's model backend, reading a user's permissions in one query instead of two.

``ModelBackend.get_all_permissions`` reads the user's own permissions and those of their groups in
two queries, on every request that checks a role (every page and API call). Here one query reads
both; the answer, its per-request cache on the user (``_perm_cache``) and every other behaviour
(inactive users have none, superusers have all) are Django's own.
"""

from __future__ import annotations

from django.contrib.auth.backends import ModelBackend
from django.contrib.auth.models import Permission
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
