"""Issued documents: station description sheets and control reports."""

from __future__ import annotations

from django.conf import settings
from django.db import models
from django.db.models import Q

from registry.models.jobs import Job
from registry.models.marks import Mark


class DocumentKind(models.TextChoices):
    SHEET = "sheet", "station description sheet"
    REPORT = "report", "control report"


class DocumentState(models.TextChoices):
    DRAFT = "draft", "draft"
    CHECKED = "checked", "checked"
    SIGNED = "signed", "signed"
    SUPERSEDED = "superseded", "superseded"


class Document(models.Model):
    kind = models.CharField(max_length=8, choices=DocumentKind.choices)
    mark = models.ForeignKey(Mark, null=True, blank=True, on_delete=models.PROTECT, related_name="documents")
    job = models.ForeignKey(Job, null=True, blank=True, on_delete=models.PROTECT, related_name="documents")
    revision = models.PositiveIntegerField(default=1)
    state = models.CharField(max_length=10, choices=DocumentState.choices, default=DocumentState.DRAFT)
    pdf = models.FileField(upload_to="documents/%Y/", max_length=400, blank=True)
    sha256 = models.CharField(max_length=64, blank=True)
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)
    checked_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    checked_at = models.DateTimeField(null=True, blank=True)
    signed_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    signed_at = models.DateTimeField(null=True, blank=True)
    supersedes = models.OneToOneField(
        "self", null=True, blank=True, on_delete=models.PROTECT, related_name="superseded_by"
    )

    class Meta:
        ordering = ["-created_at"]
        constraints = [
            models.CheckConstraint(
                condition=(Q(kind="sheet") & Q(mark__isnull=False) & Q(job__isnull=True))
                | (Q(kind="report") & Q(job__isnull=False) & Q(mark__isnull=True)),
                name="document_subject_matches_kind",
            ),
            models.CheckConstraint(
                condition=~Q(state="signed")
                | (Q(signed_by__isnull=False) & Q(signed_at__isnull=False) & ~Q(sha256="")),
                name="document_signed_has_signature",
            ),
        ]

    def __str__(self) -> str:
        subject = self.mark_id if self.kind == DocumentKind.SHEET else self.job_id
        return f"{self.kind} {subject} rev {self.revision} ({self.state})"
