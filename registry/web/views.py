"""Shared page plumbing: the role gate every page goes through, the refusal page, uploaded files.

Every page needs a signed-in user (anonymous → the sign-in page, with ``next``) and
an ability from :mod:`registry.roles`; a signed-in user without it gets a plain 403
page that says which ability is missing. Services' own refusals
(:class:`registry.errors.PermissionDeniedError`, :class:`registry.errors.NotFound`)
become the same 403 page and a 404.
"""

from __future__ import annotations

from functools import wraps
from pathlib import Path
from urllib.parse import quote

from django.conf import settings
from django.contrib.auth.views import redirect_to_login
from django.core.exceptions import SuspiciousFileOperation
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.utils._os import safe_join
from django.views.static import serve

from registry.errors import NotFound, PermissionDeniedError
from registry.roles import Ability, has_ability

ABILITY_WORDS = {
    Ability.VIEW: "read the registry",
    Ability.RECORD: "record fieldwork",
    Ability.MANAGE: "create and edit marks",
    Ability.SIGN: "sign documents",
    Ability.ADMINISTER: "administer the registry",
}


def forbidden(request: HttpRequest, *, ability: Ability | None = None, message: str = "") -> HttpResponse:
    """The plain 403 page."""
    context = {
        "ability_words": ABILITY_WORDS.get(ability, "") if ability else "",
        "message": message,
    }
    return render(request, "registry/forbidden.html", context, status=403)


def ability_required(ability: Ability):
    """Decorate a page view: sign-in required, then ``ability``; service refusals mapped to 403/404."""

    def decorator(view):
        @wraps(view)
        def wrapped(request: HttpRequest, *args, **kwargs) -> HttpResponse:
            if not request.user.is_authenticated:
                return redirect_to_login(request.get_full_path())
            if not has_ability(request.user, ability):
                return forbidden(request, ability=ability)
            try:
                return view(request, *args, **kwargs)
            except PermissionDeniedError as exc:
                return forbidden(request, message=exc.message)
            except NotFound as exc:
                raise Http404(exc.message) from exc

        wrapped.required_ability = ability
        return wrapped

    return decorator


def home(request: HttpRequest) -> HttpResponse:
    return redirect("web:mark-list")


DEFAULT_MEDIA_ACCEL_PREFIX = "/_protected_media/"
#: Uploaded files a browser may show (the rest is always a download); the same list as nginx's map.
INLINE_TYPES = {
    ".jpg": "image/jpeg",
    ".jpeg": "image/jpeg",
    ".png": "image/png",
    ".webp": "image/webp",
    ".pdf": "application/pdf",
}


def _local_media() -> bool:
    """Are uploads in the local media folder (else a shared object store: REGISTRY_STORAGE=s3)?"""
    from django.core.files.storage import FileSystemStorage, default_storage

    return isinstance(default_storage, FileSystemStorage)


def _stored_media_file(path: str) -> HttpResponse:
    """An upload kept in the shared object store, streamed through the application with the headers
    nginx gives local ones: photos and PDFs inline, everything else as a download, never as a page."""
    from django.core.files.storage import default_storage
    from django.http import FileResponse

    if not path or "\x00" in path or "\\" in path or path.startswith("/"):
        raise Http404("No such file.")
    parts = path.split("/")
    if any(part in ("", ".", "..") for part in parts):
        raise Http404("No such file.")
    rel = "/".join(parts)
    if not default_storage.exists(rel):
        raise Http404("No such file.")
    fh = default_storage.open(rel, "rb")
    suffix = Path(rel).suffix.lower()
    inline = suffix in INLINE_TYPES
    response = FileResponse(
        fh,
        as_attachment=not inline,
        filename=parts[-1],
        content_type=INLINE_TYPES.get(suffix, "application/octet-stream"),
    )
    response["Cache-Control"] = "private"
    response["X-Content-Type-Options"] = "nosniff"
    response["Content-Security-Policy"] = "default-src 'none'; img-src 'self'; sandbox"
    return response


def safe_media_path(path: str) -> str:
    """``path`` as a clean relative path inside ``MEDIA_ROOT``; ``Http404`` for anything else.

    Refused: NUL and backslashes, absolute paths, ``.``/``..`` segments, empty segments, and
    anything that would resolve (symbolic links included) outside ``MEDIA_ROOT``.
    """
    if not path or "\x00" in path or "\\" in path or path.startswith("/"):
        raise Http404("No such file.")
    parts = path.split("/")
    if any(part in ("", ".", "..") for part in parts):
        raise Http404("No such file.")
    root = Path(settings.MEDIA_ROOT).resolve()
    try:
        full = Path(safe_join(str(root), path)).resolve()
        full.relative_to(root)
    except (SuspiciousFileOperation, ValueError):
        raise Http404("No such file.") from None
    if not full.is_file():
        raise Http404("No such file.")
    return "/".join(parts)


@ability_required(Ability.VIEW)
def media_file(request: HttpRequest, path: str) -> HttpResponse:
    """Uploaded files (photos, attachments), for signed-in users with the VIEW ability only.

    With ``DEBUG`` (or ``REGISTRY_MEDIA_BY_DJANGO=1``, which the demo sets: it runs without the debug
    page and without nginx) the file is streamed by Django. In production the answer is an empty response
    with ``X-Accel-Redirect: <REGISTRY["MEDIA_ACCEL_PREFIX"]><path>``: nginx then sends the file
    from its ``internal`` location (``deploy/nginx/registry.conf``), which no browser can reach
    directly, so every download passes this sign-in and role check first.
    """
    if not _local_media():
        return _stored_media_file(path)
    rel = safe_media_path(path)
    if settings.DEBUG or settings.REGISTRY.get("MEDIA_BY_DJANGO"):  # development, and the demo (no nginx)
        return serve(request, rel, document_root=settings.MEDIA_ROOT)
    prefix = settings.REGISTRY.get("MEDIA_ACCEL_PREFIX") or DEFAULT_MEDIA_ACCEL_PREFIX
    response = HttpResponse()
    response["X-Accel-Redirect"] = prefix.rstrip("/") + "/" + quote(rel, safe="/")
    del response["Content-Type"]  # nginx sets it from the file name (its types block)
    response["Cache-Control"] = "private"
    return response
