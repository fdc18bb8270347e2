from django.apps import AppConfig


class SignInSessionsConfig(AppConfig):
    """The session table of ``registry.sessions`` (its own app: never read from the replica, which serves
    only the ``registry`` app's models, ``registry/dbrouter.py``)."""

    name = "registry.sessions"
    label = "registry_sessions"
    verbose_name = "Sign-in sessions"
    default_auto_field = "django.db.models.BigAutoField"
