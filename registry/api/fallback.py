"""Django's error views, in the API's error shape under ``/api/``.

Requests that never reach a DRF view (an address that does not exist, a body over Django's
size limit, a server error) are answered by Django's ``handler404``/``handler400``/
``handler403``/``handler500``. Under ``/api/`` these answer JSON,
``{"error": {"code", "message", "details": null}}``; elsewhere the usual pages.
"""

from __future__ import annotations

from django.core.exceptions import RequestDataTooBig
from django.http import HttpRequest, JsonResponse
from django.views import defaults

from registry.api.errors import error_body


def is_api(request: HttpRequest) -> bool:
    return request.path.startswith("/api/")


def api_error(code: str, message: str, status: int) -> JsonResponse:
    return JsonResponse(error_body(code, message), status=status)


def too_large() -> JsonResponse:
    return api_error(
        "request_too_large",
        "The request body is larger than the server accepts (see the API's documented limits).",
        413,
    )


def not_found(request, exception=None):
    if is_api(request):
        return api_error("not_found", "Not found.", 404)
    return defaults.page_not_found(request, exception)


def bad_request(request, exception=None):
    if isinstance(exception, RequestDataTooBig):
        if is_api(request):
            return too_large()
        return defaults.bad_request(request, exception)
    if is_api(request):
        return api_error("bad_request", "The request could not be read.", 400)
    return defaults.bad_request(request, exception)


def permission_denied(request, exception=None):
    if is_api(request):
        return api_error("permission_denied", "You do not have permission to do this.", 403)
    return defaults.permission_denied(request, exception)


def server_error(request):
    if is_api(request):
        return api_error("server_error", "The server failed to answer; the error is in its log.", 500)
    return defaults.server_error(request)
