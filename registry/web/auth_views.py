"""Sign in and sign out: Django's auth views with our own templates, and the sign-in throttle.

A sign-in is refused without checking the password while its account or its client address is
paused after too many failures (``registry/services/signin.py``); the page says how long to wait
(status 429, ``Retry-After``). Each failed password is counted and audited.
"""

from __future__ import annotations

from django.contrib.auth import views as auth_views
from django.http import HttpResponse

from registry.services.signin import client_address, signin_failed, signin_refusal, signin_succeeded


class SignInView(auth_views.LoginView):
    template_name = "registry/login.html"
    redirect_authenticated_user = True

    def post(self, request, *args, **kwargs) -> HttpResponse:
        username = str(request.POST.get("username", ""))
        refusal = signin_refusal(username=username, address=client_address(request))
        if refusal is not None:
            form = self.get_form_class()(request, data=None, initial={"username": username[:150]})
            response = self.render_to_response(self.get_context_data(form=form, paused_message=refusal.message))
            response.status_code = 429
            response["Retry-After"] = str(refusal.wait_seconds)
            return response
        return super().post(request, *args, **kwargs)

    def form_valid(self, form):
        signin_succeeded(username=form.get_user().get_username())
        return super().form_valid(form)

    def form_invalid(self, form):
        data = form.data
        username, password = str(data.get("username", "")), str(data.get("password", ""))
        if username.strip() and password:  # a password was checked and failed
            left = signin_failed(username=username, address=client_address(self.request))
            refusal = signin_refusal(username=username, address=client_address(self.request))
            if refusal is not None:
                form.errors.clear()
                form.add_error(None, refusal.message)
            elif left <= 2:
                form.add_error(
                    None,
                    f"{left} more failed attempt{'s' if left != 1 else ''} and sign-in to this account is paused "
                    "for a while.",
                )
        return super().form_invalid(form)


class SignOutView(auth_views.LogoutView):
    """Sign out (POST only, as Django requires), then back to the sign-in page."""
