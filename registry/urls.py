"""Root URL configuration: pages under /, the JSON API under /api/."""

from django.contrib import admin
from django.urls import include, path

urlpatterns = [
    path("api/", include("registry.api.urls")),
    path("django-admin/", admin.site.urls),
    path("", include("registry.web.urls")),
]
