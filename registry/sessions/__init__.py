"""Sessions in the database, each row naming its signed-in user, read with that user in one query.

This is Django's ``db`` session engine with its own table (:class:`registry.sessions.models.SignInSession`,
Django's session model with one more column: the signed-in user's id, as Django's documentation shows
for extending the database engine). Writing, expiry, cycling keys and signing the data stay Django's.

Reading differs: every signed-in request reads its session and then its user, their roles and their
permissions (``registry.auth_backend``). Here one plain SQL statement on the primary database reads the
session's row joined with its user's (``registry.auth_backend.user_columns_sql``), prepared once per
connection on PostgreSQL (``registry.dbprepared``: planning this join cost more than running it); the user read so is
kept on this session object (``user_read_with_session``, this request only) and handed to the backend's
``get_user`` by ``registry.auth_backend.AuthenticationMiddleware``, which takes it only when the
session's own data name the same user. Nothing is kept between requests: a session signed out (its row
deleted), expired, or a user whose role was taken away count from the next request on, as before.
"""

from __future__ import annotations

import logging

from django.contrib.auth import SESSION_KEY
from django.contrib.sessions.backends.db import SessionStore as DatabaseSessionStore
from django.core.exceptions import SuspiciousOperation
from django.db import connections, router
from django.utils import timezone

from registry import dbprepared

_SQL_CACHE: dict[str, str] = {}


def _session_sql(vendor: str, session_table: str) -> str:
    from django.contrib.auth import get_user_model

    from registry.auth_backend import user_columns_sql

    user_table = get_user_model()._meta.db_table
    return (
        f"SELECT s.session_data, s.user_id, {user_columns_sql(vendor, 'u')} "
        f'FROM {session_table} s LEFT JOIN "{user_table}" u ON u.id = s.user_id '
        "WHERE s.session_key = %s AND s.expire_date > %s"
    )


class SessionStore(DatabaseSessionStore):
    #: (user id, user or None) read with the session's row, when the row names a user; this request only.
    user_read_with_session: tuple[object, object] | None = None

    @classmethod
    def get_model_class(cls):
        from registry.sessions.models import SignInSession  # not at import: the engine loads before the apps

        return SignInSession

    def create_model_instance(self, data):
        """Django's row, with the signed-in user's id (None when the data name no valid one)."""
        obj = super().create_model_instance(data)
        try:
            obj.user_id = int(data.get(SESSION_KEY))
        except (TypeError, ValueError):
            obj.user_id = None
        return obj

    def _get_session_from_db(self):
        from registry.auth_backend import user_from_row

        self.user_read_with_session = None
        model = self.model
        key = self.session_key
        if not key:
            self._session_key = None
            return None
        alias = router.db_for_read(model, instance=None)
        conn = connections[alias]
        sql = _SQL_CACHE.get(conn.vendor)
        if sql is None:
            sql = _SQL_CACHE[conn.vendor] = _session_sql(conn.vendor, conn.ops.quote_name(model._meta.db_table))
        now = conn.ops.adapt_datetimefield_value(timezone.now())  # as the ORM passes it (SQLite: UTC text)
        try:
            row = dbprepared.fetchone(conn, "registry_session_with_user", sql, [key, now])
        except SuspiciousOperation as exc:  # as Django's engine: logged, no session
            logging.getLogger(f"django.security.{exc.__class__.__name__}").warning(str(exc))
            row = None
        if row is None:
            self._session_key = None
            return None
        session_data, user_id, *user_values = row
        if user_id is not None:
            user_alias = router.db_for_read(type(self)._user_model())
            if user_alias == alias:  # the same database the backend would read the user from
                self.user_read_with_session = (user_id, user_from_row(alias, user_values))
        return model(session_key=key, session_data=session_data)

    @staticmethod
    def _user_model():
        from django.contrib.auth import get_user_model

        return get_user_model()
