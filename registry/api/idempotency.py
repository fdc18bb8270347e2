"""``Idempotency-Key`` on API writes: a retried request is answered once, not done twice.

A client that lost the answer to a write (a dropped connection, a restarted worker) cannot know
whether it was done. Sent with ``Idempotency-Key: <key>`` (1-255 visible ASCII characters; a UUID
is a good choice), a ``POST``, ``PUT``, ``PATCH`` or ``DELETE`` under ``/api/`` is handled so:

- **First time**: the request runs inside one database transaction together with storing its
  answer (status, body, ``Location``) under (user, key) with a SHA-256 of the request (method,
  path, query, content type and body). Either both are committed or neither: a retry after a
  crash finds the stored answer exactly when the write happened.
- **Same user, same key, same request, within a day**: the stored answer is sent again with
  ``Idempotent-Replayed: true``; nothing is written.
- **Same key, different request**: 422 ``idempotency_key_reused``; nothing is written.
- **Same key while the first request is still running** (two retries at once): on PostgreSQL the
  second waits for the first and then gets its answer; on SQLite writes are serialised anyway.
- Server errors (5xx) are not stored: the write was rolled back and the key may be used again.
- Keys are per user (two users may use the same key) and kept for a day
  (:data:`KEY_LIFETIME`), after which a key may be used again; old records are removed as new ones
  are stored. Requests without the header behave as before; anonymous requests are not recorded
  (the view refuses them anyway).
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import re

from django.db import DatabaseError, IntegrityError, transaction
from django.http import HttpRequest, HttpResponse, JsonResponse
from django.utils import timezone

from registry.api.errors import error_body

HEADER = "Idempotency-Key"
REPLAYED_HEADER = "Idempotent-Replayed"
KEY_LIFETIME = _dt.timedelta(days=1)
KEY_PATTERN = re.compile(r"^[\x21-\x7e]{1,255}$")
WRITE_METHODS = frozenset({"POST", "PUT", "PATCH", "DELETE"})
_CHUNK = 64 * 1024


class _HashingStream:
    """Wraps the request's input stream; everything read through it is hashed.

    A multipart body's boundary is chosen anew by most clients for every send, so a retry of the
    same upload differs from the first only there: the boundary is replaced by a fixed token
    before hashing (``pattern``; found across chunk edges by carrying the last bytes over).
    """

    TOKEN = b"--multipart-boundary--"

    def __init__(self, stream, digest, pattern: bytes = b""):
        self._stream = stream
        self.digest = digest
        self._done = False
        self._pattern = pattern
        self._carry = b""

    def _update(self, data: bytes, final: bool = False) -> None:
        if not self._pattern:
            self.digest.update(data)
            return
        buf = self._carry + data
        start = 0
        while (found := buf.find(self._pattern, start)) != -1:
            self.digest.update(buf[start:found] + self.TOKEN)
            start = found + len(self._pattern)
        rest = buf[start:]
        keep = 0 if final else min(len(rest), len(self._pattern) - 1)
        self.digest.update(rest[: len(rest) - keep])
        self._carry = rest[len(rest) - keep :]

    def read(self, *args, **kwargs):
        data = self._stream.read(*args, **kwargs)
        self._update(data)
        return data

    def readline(self, *args, **kwargs):
        data = self._stream.readline(*args, **kwargs)
        self._update(data)
        return data

    def close(self) -> None:
        """Django closes the stream after reading the whole body; the rest (if any) is still hashed."""
        self.drain()
        self._stream.close()

    def __getattr__(self, name):
        return getattr(self._stream, name)

    def drain(self) -> None:
        while not self._done and self.read(_CHUNK):
            pass
        if not self._done:
            self._update(b"", final=True)
        self._done = True


def _boundary(request: HttpRequest) -> bytes:
    if (request.content_type or "") != "multipart/form-data":
        return b""
    boundary = (request.content_params or {}).get("boundary", "")
    return boundary.encode("ascii", "replace") if boundary else b""


def _start_digest(request: HttpRequest):
    digest = hashlib.sha256()
    for part in (request.method, request.path, request.META.get("QUERY_STRING", ""), request.content_type or ""):
        digest.update(part.encode("utf-8", "surrogateescape") + b"\n")
    return digest


def _api_user(request: HttpRequest):
    """The user the API will see: a token (``Authorization: Token ...``), else the session."""
    forced = getattr(request, "_force_auth_user", None)  # DRF's test client (APIClient.force_authenticate)
    if forced is not None:
        return forced
    auth = request.META.get("HTTP_AUTHORIZATION", "").split()
    if len(auth) == 2 and auth[0].lower() == "token":
        from rest_framework.authtoken.models import Token

        token = Token.objects.select_related("user").filter(key=auth[1]).first()
        return token.user if token is not None and token.user.is_active else None
    user = getattr(request, "user", None)
    return user if user is not None and user.is_authenticated else None


def _replay(record) -> HttpResponse:
    response = HttpResponse(bytes(record.body), status=record.status_code, content_type=record.content_type or None)
    if record.location:
        response["Location"] = record.location
    response[REPLAYED_HEADER] = "true"
    return response


def _reused() -> JsonResponse:
    return JsonResponse(
        error_body(
            "idempotency_key_reused",
            "This Idempotency-Key was already used for a different request. Use a new key for a new request.",
        ),
        status=422,
    )


class IdempotencyMiddleware:
    """Django middleware (after the authentication middleware); see the module docstring."""

    def __init__(self, get_response):
        self.get_response = get_response

    def __call__(self, request: HttpRequest) -> HttpResponse:
        key = request.headers.get(HEADER)
        if key is None or request.method not in WRITE_METHODS or not request.path.startswith("/api/"):
            return self.get_response(request)
        if not KEY_PATTERN.match(key):
            return JsonResponse(
                error_body(
                    "idempotency_key_invalid",
                    "The Idempotency-Key header must be 1 to 255 visible ASCII characters (a UUID, for example).",
                ),
                status=400,
            )
        user = _api_user(request)
        if user is None:
            return self.get_response(request)
        from registry.models import IdempotencyRecord

        digest = _start_digest(request)
        stream = _HashingStream(request._stream, digest, _boundary(request))
        request._stream = stream
        now = timezone.now()
        with transaction.atomic():
            existing = IdempotencyRecord.objects.filter(user=user, key=key, created_at__gte=now - KEY_LIFETIME).first()
            if existing is not None:
                stream.drain()
                return _replay(existing) if existing.request_hash == digest.hexdigest() else _reused()
            response = self.get_response(request)
            if response.status_code >= 500 or response.streaming:
                transaction.set_rollback(True)
                return response
            stream.drain()
            request_hash = digest.hexdigest()
            try:
                with transaction.atomic():
                    IdempotencyRecord.objects.filter(created_at__lt=now - KEY_LIFETIME).delete()
                    IdempotencyRecord.objects.create(
                        user=user,
                        key=key,
                        method=request.method,
                        path=request.path[:2000],
                        request_hash=request_hash,
                        status_code=response.status_code,
                        content_type=response.get("Content-Type", "")[:200],
                        location=response.get("Location", "")[:2000],
                        body=response.content,
                    )
            except IntegrityError:
                # The same key was stored by a request that committed while this one ran: undo this one.
                transaction.set_rollback(True)
                raced = True
            except DatabaseError:
                transaction.set_rollback(True)
                return JsonResponse(
                    error_body(
                        "write_not_completed",
                        "The write could not be completed and nothing was saved; send it again with the same key.",
                    ),
                    status=503,
                )
            else:
                raced = False
        if raced:
            first = IdempotencyRecord.objects.filter(user=user, key=key).first()
            if first is None:  # the other request's record is gone already: this one was undone
                return JsonResponse(
                    error_body(
                        "write_not_completed",
                        "The write could not be completed and nothing was saved; send it again with the same key.",
                    ),
                    status=503,
                )
            return _replay(first) if first.request_hash == request_hash else _reused()
        return response
