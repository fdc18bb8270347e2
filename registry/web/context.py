"""Template context shared by every page."""

from __future__ import annotations

from django.conf import settings


def registry_context(request):
    from registry.roles import role_names

    user = getattr(request, "user", None)
    return {
        "basemap_url": settings.REGISTRY.get("BASEMAP_URL", ""),
        "user_roles": role_names(user, as_signed_in=True) if user is not None and user.is_authenticated else [],
    }
