"""Server-rendered pages."""

from django.urls import path

app_name = "web"

urlpatterns: list = []
