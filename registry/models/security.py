"""Records that protect the service itself: sign-in throttling and idempotent API writes.

- :class:`SigninThrottle`: failed sign-ins counted per account and per client address
  (``registry/services/signin.py``).
- :class:`IdempotencyRecord`: the first answer to an API write sent with an ``Idempotency-Key``
  header, kept for a day (``registry/api/idempotency.py``).
- :class:`RequestCount`: requests of one client address to one public page in one minute, the rate
  limit every application server shares (``registry/services/ratelimit.py``).
"""

from __future__ import annotations

from django.conf import settings
from django.db import models
from django.utils import timezone


class SigninThrottle(models.Model):
    """Failed sign-ins of one account (``account:<user name>``) or one address (``address:<ip>``)."""

    key = models.CharField(max_length=200, unique=True)
    failures = models.PositiveIntegerField(default=0)
    window_started_at = models.DateTimeField(default=timezone.now, db_index=True)
    locked_until = models.DateTimeField(null=True, blank=True)

    def __str__(self) -> str:
        return f"{self.key}: {self.failures} failed"


class IdempotencyRecord(models.Model):
    """The answer to one API write, replayed when the same user sends the same key again."""

    user = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.CASCADE, related_name="+")
    key = models.CharField(max_length=255)
    method = models.CharField(max_length=10)
    path = models.CharField(max_length=2000)
    request_hash = models.CharField(max_length=64, help_text="SHA-256 of method, path, query, content type and body.")
    status_code = models.PositiveSmallIntegerField()
    content_type = models.CharField(max_length=200, blank=True)
    location = models.CharField(max_length=2000, blank=True)
    body = models.BinaryField()
    created_at = models.DateTimeField(default=timezone.now, db_index=True)

    class Meta:
        constraints = [models.UniqueConstraint(fields=["user", "key"], name="idempotency_user_key")]

    def __str__(self) -> str:
        return f"{self.method} {self.path} ({self.key})"


class RequestCount(models.Model):
    """Requests from one client address to one rate-limited public page in one clock minute.

    Kept in the database so that every gunicorn worker on every application server counts against the
    same limit; counted with one atomic upsert per request; rows older than the previous minute are
    removed as new minutes begin.
    """

    scope = models.CharField(max_length=40)
    client = models.CharField(max_length=64)
    minute = models.BigIntegerField(help_text="Whole minutes since 1970-01-01 UTC.")
    hits = models.PositiveIntegerField(default=0)

    class Meta:
        constraints = [
            models.UniqueConstraint(fields=["scope", "client", "minute"], name="requestcount_one_per_minute")
        ]
        indexes = [models.Index(fields=["minute"], name="requestcount_minute")]

    def __str__(self) -> str:
        return f"{self.scope} {self.client} minute {self.minute}: {self.hits}"
