"""Shared file storage for several application servers: an S3-compatible object store (django-storages).

:class:`SharedObjectStorage` keeps uploads and signed documents as private objects and gives every file
the registry's own address (``/media/<name>``) instead of the store's, so each download still passes the
sign-in and role check (``registry/web/views.py`` ``media_file``) and clients never need to reach the
store. Chosen with ``REGISTRY_STORAGE=s3`` (settings; deploy/README.md "Running it for many offices").
"""

from __future__ import annotations

from urllib.parse import quote

from django.conf import settings
from storages.backends.s3 import S3Storage


class SharedObjectStorage(S3Storage):
    def url(self, name, parameters=None, expire=None, http_method=None):
        prefix = "/" + settings.MEDIA_URL.strip("/") + "/"
        return prefix + quote(str(name).lstrip("/"), safe="/")
