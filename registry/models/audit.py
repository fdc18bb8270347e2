"""The append-only audit trail.

Rows are only ever inserted. ``save()`` refuses an update, ``delete()`` refuses,
and database triggers (migration 0003) refuse UPDATE and DELETE on both SQLite
and PostgreSQL.
"""

from __future__ import annotations

from django.conf import settings
from django.db import models


class AuditTrailError(Exception):
    """The audit trail is append-only."""


class AuditEvent(models.Model):
    at = models.DateTimeField(auto_now_add=True, db_index=True)
    actor = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )
    action = models.CharField(max_length=60, help_text="<entity>_<action>, e.g. mark_update.")
    object_type = models.CharField(max_length=40)
    object_id = models.CharField(max_length=40)
    object_repr = models.CharField(max_length=200, blank=True)
    mark = models.ForeignKey(
        "registry.Mark", null=True, blank=True, on_delete=models.PROTECT, related_name="audit_events"
    )
    before = models.JSONField(null=True, blank=True)
    after = models.JSONField(null=True, blank=True)
    note = models.TextField(blank=True)

    class Meta:
        ordering = ["-at", "-id"]
        indexes = [models.Index(fields=["object_type", "object_id"], name="audit_object")]

    def __str__(self) -> str:
        return f"{self.at:%Y-%m-%d %H:%M:%S} {self.action} {self.object_type}:{self.object_id}"

    def save(self, *args, **kwargs):
        if self.pk is not None:
            raise AuditTrailError("Audit events are never changed.")
        super().save(*args, **kwargs)

    def delete(self, *args, **kwargs):
        raise AuditTrailError("Audit events are never deleted.")
