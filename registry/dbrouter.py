"""Reads that tolerate a little lag go to a PostgreSQL streaming replica; everything else to the primary.

With ``REGISTRY_REPLICA_URL`` set (settings: the ``replica`` database alias), :class:`ReplicaReadsMiddleware`
sends the reads of a request to the replica when all of these hold:

* the request only reads (GET or HEAD) and its page is one of :data:`LAG_TOLERANT_VIEWS` (searches and
  lists, marks near a point, exports of published data, the public verification page, signed documents'
  PDFs, which never change);
* the client has not written anything in the last ``REGISTRY_REPLICA_PIN_SECONDS`` (default 10 s): after a
  write the same browser or API client reads from the primary for that long, so it always sees what it just
  saved (a cookie carries the moment; it only ever steers reads to the primary, so a client gains nothing by
  forging it);
* the replica answers and is no further behind than ``REGISTRY_REPLICA_MAX_LAG_SECONDS`` (default 30 s).
  The check runs at most every couple of seconds per process (:func:`replica_usable`); a replica that does
  not answer is left alone for ``REGISTRY_REPLICA_RETRY_SECONDS`` (default 15 s) and the primary serves;
* a request whose replica read fails midway (the replica stopped) is run again, once, on the primary.

Only the registry's own tables are read from the replica; sign-in, sessions, tokens and the task queue are
always read from the primary. Writes always go to the primary, and within a request that writes nothing is
read from the replica. Without a replica configured this module changes nothing.
"""

from __future__ import annotations

import contextvars
import logging
import threading
import time

from django.conf import settings
from django.db import DatabaseError, connections

log = logging.getLogger(__name__)

REPLICA = "replica"
PRIMARY = "default"
#: Cookie holding the moment (Unix seconds) until which this client reads from the primary.
PIN_COOKIE = "registry_primary_until"
#: URL names (namespace:name) whose GET/HEAD reads may come from the replica.
LAG_TOLERANT_VIEWS = frozenset(
    {
        "web:mark-list",
        "web:marks-near",
        "web:job-list",
        "web:document-list",
        "web:document-pdf",
        "web:verify",
        "web:verify-upload",
        "api:mark-list",
        "api:marks-near",
        "api:marks-export",
        "api:marks-export-csv",
        "api:marks-export-geojson",
        "api:job-list",
        "api:document-list",
        "api:document-pdf",
        "api:verify",
    }
)
#: Apps whose models may be read from the replica (never auth, sessions, tokens or the task queue).
REPLICA_APPS = frozenset({"registry"})

_read_from: contextvars.ContextVar[str | None] = contextvars.ContextVar("registry_read_from", default=None)


def _setting(name: str, default: float) -> float:
    return float(getattr(settings, "REGISTRY", {}).get(name, default))


def replica_configured() -> bool:
    return REPLICA in settings.DATABASES


class _Health:
    """Per-process memory of the replica's last check (thread-safe)."""

    def __init__(self) -> None:
        self.lock = threading.Lock()
        self.checked_at = 0.0
        self.usable = False
        self.down_until = 0.0
        self.lag_s: float | None = None

    def reset(self) -> None:
        with self.lock:
            self.checked_at = 0.0
            self.usable = False
            self.down_until = 0.0
            self.lag_s = None


health = _Health()
CHECK_EVERY_S = 2.0


def mark_replica_down(reason: str = "") -> None:
    """Stop reading from the replica for REGISTRY_REPLICA_RETRY_SECONDS (it failed)."""
    now = time.monotonic()
    with health.lock:
        health.usable = False
        health.checked_at = now
        health.down_until = now + _setting("REPLICA_RETRY_SECONDS", 15.0)
    try:
        connections[REPLICA].close()
    except Exception:  # noqa: BLE001 - a broken connection may fail to close; it is dropped either way
        pass
    log.warning("Reads go to the primary database: the replica is not usable (%s).", reason or "no answer")


def replica_lag_seconds() -> float:
    """How far the replica's replay is behind: 0 when it has replayed all it received, else the age of
    the last replayed transaction (an idle primary sends nothing, which is not lag)."""
    with connections[REPLICA].cursor() as cur:
        cur.execute(
            "SELECT pg_is_in_recovery(), CASE WHEN pg_last_wal_receive_lsn() IS NULL "
            "OR pg_last_wal_receive_lsn() = pg_last_wal_replay_lsn() THEN 0 "
            "ELSE COALESCE(EXTRACT(EPOCH FROM clock_timestamp() - pg_last_xact_replay_timestamp()), 0) END"
        )
        in_recovery, lag = cur.fetchone()
    if not in_recovery:
        # A promoted former replica is a primary of its own: never read from it behind the real one's back.
        raise DatabaseError("the replica database is not in recovery (it was promoted)")
    return float(lag)


def replica_usable() -> bool:
    """Is the replica answering and within the allowed lag? Checked at most every CHECK_EVERY_S."""
    if not replica_configured():
        return False
    now = time.monotonic()
    with health.lock:
        if now < health.down_until:
            return False
        if now - health.checked_at < CHECK_EVERY_S:
            return health.usable
    try:
        lag = replica_lag_seconds()
    except Exception as exc:  # noqa: BLE001 - any failure to reach the replica means: use the primary
        mark_replica_down(str(exc).strip().splitlines()[0] if str(exc).strip() else exc.__class__.__name__)
        return False
    ok = lag <= _setting("REPLICA_MAX_LAG_SECONDS", 30.0)
    with health.lock:
        health.checked_at = time.monotonic()
        health.usable = ok
        health.lag_s = lag
    if not ok:
        log.warning("Reads go to the primary database: the replica is %.1f s behind.", lag)
    return ok


class ReplicaRouter:
    """Database router: the replica only for registry models, only while a request allows it."""

    def db_for_read(self, model, **hints):
        if _read_from.get() == REPLICA and model._meta.app_label in REPLICA_APPS:
            return REPLICA
        return PRIMARY

    def db_for_write(self, model, **hints):
        return PRIMARY

    def allow_relation(self, obj1, obj2, **hints):
        return True  # the same rows, wherever they were read

    def allow_migrate(self, db, app_label, model_name=None, **hints):
        return db == PRIMARY


class reads_from_replica:  # noqa: N801 - used like a function: ``with reads_from_replica():``
    """Context manager: reads of registry models in this block go to the replica when it is usable."""

    def __init__(self, *, check: bool = True) -> None:
        self.check = check
        self.token = None

    def __enter__(self) -> str:
        use = replica_usable() if self.check else replica_configured()
        self.token = _read_from.set(REPLICA if use else None)
        return REPLICA if use else PRIMARY

    def __exit__(self, *exc) -> None:
        _read_from.reset(self.token)


def current_read_alias() -> str:
    return REPLICA if _read_from.get() == REPLICA else PRIMARY


class ReplicaReadsMiddleware:
    """Choose the database for a request's reads (see the module docstring)."""

    SAFE = frozenset({"GET", "HEAD"})

    def __init__(self, get_response):
        self.get_response = get_response

    def __call__(self, request):
        request.registry_read_from = PRIMARY
        response = self.get_response(request)
        if request.method not in self.SAFE and response.status_code < 500 and replica_configured():
            pin_s = _setting("REPLICA_PIN_SECONDS", 10.0)
            response.set_cookie(
                PIN_COOKIE,
                f"{time.time() + pin_s:.3f}",
                max_age=max(1, int(pin_s) + 1),
                httponly=True,
                samesite="Lax",
                secure=request.is_secure(),
            )
        return response

    def _pinned(self, request) -> bool:
        try:
            return float(request.COOKIES.get(PIN_COOKIE, "0")) > time.time()
        except ValueError:
            return False

    def process_view(self, request, view_func, view_args, view_kwargs):
        if request.method not in self.SAFE or not replica_configured():
            return None
        match = request.resolver_match
        if match is None or match.view_name not in LAG_TOLERANT_VIEWS or self._pinned(request):
            return None
        if not replica_usable():
            return None
        token = _read_from.set(REPLICA)
        request.registry_read_from = REPLICA
        try:
            try:
                response = view_func(request, *view_args, **view_kwargs)
                if hasattr(response, "render") and callable(response.render) and not response.is_rendered:
                    response = response.render()  # lazy templates read while rendering: still on the replica
            except DatabaseError as exc:
                if not _replica_failed(exc):
                    raise
                mark_replica_down(str(exc).strip().splitlines()[0] if str(exc).strip() else "")
                _read_from.set(None)
                request.registry_read_from = PRIMARY
                response = view_func(request, *view_args, **view_kwargs)
            return response
        finally:
            _read_from.reset(token)


def _replica_failed(exc: Exception) -> bool:
    """Was this database error the replica's connection failing (not a query's own error)?"""
    from django.db import InterfaceError, OperationalError

    conn = connections[REPLICA]
    broken = isinstance(exc, (OperationalError, InterfaceError))
    if conn.connection is not None:
        try:
            broken = broken or bool(conn.connection.closed)
        except Exception:  # noqa: BLE001
            broken = True
    return broken
