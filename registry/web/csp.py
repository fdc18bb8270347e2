"""A strict Content-Security-Policy on every answer: our own scripts and styles only.

No inline ``<script>``, ``<style>``, ``style=""`` or event-handler attributes anywhere: page
behaviour lives in ``registry/web/static/registry/*.js`` and looks in ``registry.css`` (the
API's documentation page uses the Swagger UI files vendored by ``drf-spectacular-sidecar``, its
start-up script served as a file too). The policy:

``default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data: [tile host];
font-src 'self'; connect-src 'self'; object-src 'none'; base-uri 'none'; form-action 'self';
frame-ancestors 'none'``

``data:`` images serve the icons inside the vendored Swagger UI stylesheet. With
``REGISTRY_BASEMAP_URL`` set, the tile host is added to ``img-src`` (the user's browser loads
the job map's tiles from it).
"""

from __future__ import annotations

from urllib.parse import urlsplit

from django.conf import settings

HEADER = "Content-Security-Policy"


def policy() -> str:
    img = ["'self'", "data:"]
    basemap = (settings.REGISTRY.get("BASEMAP_URL") or "").strip()
    if basemap:
        parts = urlsplit(basemap.replace("{", "").replace("}", ""))
        if parts.scheme in ("http", "https") and parts.hostname:
            port = f":{parts.port}" if parts.port else ""
            img.append(f"{parts.scheme}://{parts.hostname}{port}")
    directives = [
        "default-src 'self'",
        "script-src 'self'",
        "style-src 'self'",
        "img-src " + " ".join(img),
        "font-src 'self'",
        "connect-src 'self'",
        "object-src 'none'",
        "base-uri 'none'",
        "form-action 'self'",
        "frame-ancestors 'none'",
    ]
    return "; ".join(directives)


class ContentSecurityPolicyMiddleware:
    """Adds the policy to every response that does not carry its own."""

    def __init__(self, get_response):
        self.get_response = get_response

    def __call__(self, request):
        response = self.get_response(request)
        if HEADER not in response:
            response[HEADER] = policy()
        return response
