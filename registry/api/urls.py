"""JSON API routes. Each area adds its routes in its own module and is included here."""

from django.urls import path
from drf_spectacular.views import SpectacularAPIView, SpectacularRedocView

from registry.api import exports as exports_api

app_name = "api"

urlpatterns = [
    path("schema/", SpectacularAPIView.as_view(), name="schema"),
    path("docs/", SpectacularRedocView.as_view(url_name="api:schema"), name="docs"),
    # exports (import-export area); before marks/<code>/ so that the names never read as a code
    path("marks/export.csv", exports_api.MarksExportView.as_view(fmt="csv"), name="marks-export-csv"),
    path("marks/export.geojson", exports_api.MarksExportView.as_view(fmt="geojson"), name="marks-export-geojson"),
    path("marks/export", exports_api.MarksExportView.as_view(), name="marks-export"),
]
