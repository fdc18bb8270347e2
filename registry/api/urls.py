"""JSON API routes. Each area adds its routes in its own module and is included here."""

from django.urls import path
from drf_spectacular.views import SpectacularAPIView, SpectacularRedocView

app_name = "api"

urlpatterns = [
    path("schema/", SpectacularAPIView.as_view(), name="schema"),
    path("docs/", SpectacularRedocView.as_view(url_name="api:schema"), name="docs"),
]
