"""A marks import run in the background: the uploaded file, its progress and its outcome.

Large files are imported by a task worker (``registry.tasks.run_mark_import``) while the page
follows the run; small ones are run at once. Either way the run keeps the outcome: the summary, or
the number of problems with the first ones to show and the full list (compressed CSV) to download.
"""

from __future__ import annotations

from django.conf import settings
from django.db import models
from django.db.models import Q

from .choices import TextChoices


class ImportState(TextChoices):
    QUEUED = "queued", "waiting for a worker"
    RUNNING = "running", "running"
    DONE = "done", "imported"
    REFUSED = "refused", "refused, nothing changed"
    FAILED = "failed", "failed, nothing changed"


IMPORT_FINISHED_STATES = (ImportState.DONE, ImportState.REFUSED, ImportState.FAILED)


class MarkImportRun(models.Model):
    requested_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    requested_at = models.DateTimeField(auto_now_add=True)
    filename = models.CharField(max_length=200, blank=True)
    format = models.CharField(max_length=8, blank=True, help_text="csv or geojson; empty: from the file name")
    options = models.JSONField(default=dict, blank=True, help_text="update, overwrite, dry_run")
    sha256 = models.CharField(max_length=64, blank=True)
    size_bytes = models.PositiveBigIntegerField(default=0)
    #: The uploaded file, kept only until the run ends.
    content = models.BinaryField(blank=True, default=b"")
    state = models.CharField(max_length=8, choices=ImportState.choices, default=ImportState.QUEUED)
    progress = models.FloatField(default=0.0, help_text="0 … 1")
    step = models.CharField(max_length=200, blank=True, help_text="What the run is doing now, in words.")
    task_id = models.CharField(max_length=64, blank=True)
    started_at = models.DateTimeField(null=True, blank=True)
    finished_at = models.DateTimeField(null=True, blank=True)
    summary = models.JSONField(null=True, blank=True)
    message = models.TextField(blank=True)
    error_count = models.PositiveIntegerField(default=0)
    errors_shown = models.JSONField(default=list, blank=True, help_text="The first problems, as shown on the page.")
    #: Every problem as gzip-compressed CSV (where, mark, column, problem, code).
    errors_csv_gz = models.BinaryField(blank=True, default=b"")

    class Meta:
        ordering = ["-requested_at", "-id"]
        constraints = [
            models.CheckConstraint(condition=Q(progress__gte=0, progress__lte=1), name="import_progress_range"),
        ]

    def __str__(self) -> str:
        return f"import {self.pk} of {self.filename or 'a file'} ({self.state})"

    @property
    def finished(self) -> bool:
        return self.state in IMPORT_FINISHED_STATES
