"""Placeholder replaced by the API work (one JSON error shape)."""

from rest_framework.views import exception_handler


def api_exception_handler(exc, context):
    return exception_handler(exc, context)
