"""Sign in and sign out: Django's auth views with our own templates."""

from __future__ import annotations

from django.contrib.auth import views as auth_views


class SignInView(auth_views.LoginView):
    template_name = "registry/login.html"
    redirect_authenticated_user = True


class SignOutView(auth_views.LogoutView):
    """Sign out (POST only, as Django requires), then back to the sign-in page."""
