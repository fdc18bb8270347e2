"""Sessions in the database, as Django's ``db`` engine keeps them, read with one plain SQL statement.

Django's engine builds an ORM query to read the session of every signed-in request; here the same
row is read with plain SQL on the same database (the router's choice for the session model: the
primary). Everything else (writing, expiry, cycling keys, signing the data) is Django's engine.
"""

from __future__ import annotations

import logging

from django.contrib.sessions.backends.db import SessionStore as DatabaseSessionStore
from django.core.exceptions import SuspiciousOperation
from django.db import connections, router
from django.utils import timezone


class SessionStore(DatabaseSessionStore):
    def _get_session_from_db(self):
        model = self.model
        key = self.session_key
        if not key:
            self._session_key = None
            return None
        alias = router.db_for_read(model, instance=None)
        conn = connections[alias]
        table = conn.ops.quote_name(model._meta.db_table)
        now = conn.ops.adapt_datetimefield_value(timezone.now())  # as the ORM passes it (SQLite: UTC text)
        try:
            with conn.cursor() as cur:
                cur.execute(f"SELECT session_data FROM {table} WHERE session_key = %s AND expire_date > %s", [key, now])
                row = cur.fetchone()
        except SuspiciousOperation as exc:  # as Django's engine: logged, no session
            logging.getLogger(f"django.security.{exc.__class__.__name__}").warning(str(exc))
            row = None
        if row is None:
            self._session_key = None
            return None
        return model(session_key=key, session_data=row[0])
