"""The session table: Django's session model and the signed-in user's id (``registry.sessions``)."""

from __future__ import annotations

from django.contrib.sessions.base_session import AbstractBaseSession
from django.db import models


class SignInSession(AbstractBaseSession):
    """A browser's session; ``user_id`` names its signed-in user (null: nobody signed in).

    Not a foreign key: a user deleted while signed in leaves the row, as Django's own table does, and
    the session then reads no user. Written by the session engine from the session's own data.
    """

    user_id = models.BigIntegerField(null=True, blank=True, db_index=True)

    class Meta(AbstractBaseSession.Meta):
        db_table = "registry_signin_session"

    @classmethod
    def get_session_store_class(cls):
        from registry.sessions import SessionStore

        return SessionStore
