"""DRF permission classes built on the registry's roles."""

from __future__ import annotations

from rest_framework.permissions import SAFE_METHODS, BasePermission

from registry.roles import Ability, has_ability


class _AbilityPermission(BasePermission):
    ability: Ability = Ability.VIEW

    def has_permission(self, request, view) -> bool:
        return has_ability(request.user, self.ability)

    def has_object_permission(self, request, view, obj) -> bool:
        return self.has_permission(request, view)


class IsViewer(_AbilityPermission):
    ability = Ability.VIEW


class IsTechnician(_AbilityPermission):
    ability = Ability.RECORD


class IsManager(_AbilityPermission):
    ability = Ability.MANAGE


class IsSignatory(_AbilityPermission):
    ability = Ability.SIGN


class ReadViewerWriteManager(BasePermission):
    """Reads need the viewer ability, writes the manager ability."""

    def has_permission(self, request, view) -> bool:
        if request.method in SAFE_METHODS:
            return has_ability(request.user, Ability.VIEW)
        return has_ability(request.user, Ability.MANAGE)

    def has_object_permission(self, request, view, obj) -> bool:
        return self.has_permission(request, view)


class ReadViewerWriteJobPlanner(BasePermission):
    """Reads need the viewer ability, writes the job-planning ability of :mod:`registry.services.jobs`."""

    def has_permission(self, request, view) -> bool:
        from registry.services.jobs import may_plan_jobs

        if request.method in SAFE_METHODS:
            return has_ability(request.user, Ability.VIEW)
        return may_plan_jobs(request.user)

    def has_object_permission(self, request, view, obj) -> bool:
        return self.has_permission(request, view)
