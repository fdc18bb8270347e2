"""Shared page plumbing: the role gate every page goes through, the refusal page, media in development.

Every page needs a signed-in user (anonymous → the sign-in page, with ``next``) and
an ability from :mod:`registry.roles`; a signed-in user without it gets a plain 403
page that says which ability is missing. Services' own refusals
(:class:`registry.errors.PermissionDeniedError`, :class:`registry.errors.NotFound`)
become the same 403 page and a 404.
"""

from __future__ import annotations

from functools import wraps

from django.conf import settings
from django.contrib.auth.views import redirect_to_login
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import redirect, render
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


@ability_required(Ability.VIEW)
def media_file(request: HttpRequest, path: str) -> HttpResponse:
    """Uploaded files (photos, attachments) for signed-in users, in development only (``DEBUG``).

    In production the web server serves ``MEDIA_ROOT`` (see ``deploy/``); this view then answers 404.
    """
    if not settings.DEBUG:
        raise Http404("Uploaded files are served by the web server in production.")
    return serve(request, path, document_root=settings.MEDIA_ROOT)
