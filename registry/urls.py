"""Root URL configuration: pages under /, the JSON API under /api/.

The django-admin site (read-only, registry/admin.py) is mounted in development only: in production
users and roles are managed with ``manage.py create_user`` / ``set_roles`` (audited services).
"""

from django.conf import settings
from django.contrib import admin
from django.urls import include, path

urlpatterns = [
    path("api/", include("registry.api.urls")),
    *([] if getattr(settings, "PRODUCTION", False) else [path("django-admin/", admin.site.urls)]),
    path("", include("registry.web.urls")),
]

# Under /api/ Django's own error answers (unknown address, body too large, server error) use the
# API's error shape; elsewhere the usual pages (registry/api/fallback.py).
handler400 = "registry.api.fallback.bad_request"
handler403 = "registry.api.fallback.permission_denied"
handler404 = "registry.api.fallback.not_found"
handler500 = "registry.api.fallback.server_error"
