"""The django-admin site shows users and role groups read-only (development only).

User and role changes are writes with an audit row, so they go through the ``user_*`` services
(``manage.py create_user`` / ``set_roles``), never through the admin's forms. In production the
admin site is not mounted at all (registry/urls.py).
"""

from __future__ import annotations

from django.contrib import admin
from django.contrib.auth import get_user_model
from django.contrib.auth.admin import GroupAdmin, UserAdmin
from django.contrib.auth.models import Group


class _ReadOnly:
    def has_add_permission(self, request, obj=None):
        return False

    def has_change_permission(self, request, obj=None):
        return False

    def has_delete_permission(self, request, obj=None):
        return False


class ReadOnlyUserAdmin(_ReadOnly, UserAdmin):
    pass


class ReadOnlyGroupAdmin(_ReadOnly, GroupAdmin):
    pass


for model, model_admin in ((get_user_model(), ReadOnlyUserAdmin), (Group, ReadOnlyGroupAdmin)):
    if admin.site.is_registered(model):
        admin.site.unregister(model)
    admin.site.register(model, model_admin)
