"""Issued documents: station description sheets and control reports, their builds and their standing.

A document moves ``draft`` → ``checked`` → ``signed``; a signed document is ``superseded`` by a newer
revision of the same subject, never changed. What was signed (the PDF bytes, their SHA-256 and size, the
file path, the code, revision, subject, who prepared, checked and signed it, and with which certificate)
is frozen by database triggers (migration ``0011_signed_document_triggers``) on SQLite and PostgreSQL alike; only
its standing moves forward: ``signed`` → ``superseded``, and ``out_of_date`` from false to true when the
mark it describes changes after signing. :data:`DOCUMENT_FROZEN_FIELDS` and
:data:`DOCUMENT_STANDING_FIELDS` list every column between them (a test checks it).
"""

from __future__ import annotations

from django.conf import settings
from django.db import models
from django.db.models import Q

from registry.models.jobs import Job
from registry.models.marks import Mark

from .choices import TextChoices


class DocumentKind(TextChoices):
    SHEET = "sheet", "station description sheet"
    REPORT = "report", "control report"


class DocumentState(TextChoices):
    DRAFT = "draft", "draft"
    CHECKED = "checked", "checked"
    SIGNED = "signed", "signed"
    SUPERSEDED = "superseded", "superseded"


class PageSize(TextChoices):
    A4 = "A4", "A4 (210 × 297 mm)"
    LETTER = "Letter", "Letter (8.5 × 11 in)"


#: States whose rows are history: never deleted, their content never changed.
DOCUMENT_ISSUED_STATES = ("signed", "superseded")
#: Columns that never change once a document is signed.
DOCUMENT_FROZEN_FIELDS = (
    "code",
    "kind",
    "mark_id",
    "job_id",
    "revision",
    "page_size",
    "content",
    "size_bytes",
    "sha256",
    "page_count",
    "signature_page",
    "signature_box",
    "pdf",
    "options",
    "created_by_id",
    "created_at",
    "checked_by_id",
    "checked_at",
    "check_note",
    "checked_sha256",
    "signed_by_id",
    "signed_at",
    "certificate_id",
    "supersedes_id",
)
#: Columns that record a signed document's standing; they only move forward.
DOCUMENT_STANDING_FIELDS = ("state", "superseded_at", "out_of_date", "out_of_date_at", "out_of_date_reason")


class DocumentFrozenError(Exception):
    """A signed or superseded document never changes and is never deleted."""

    code = "document_frozen"


class Document(models.Model):
    code = models.CharField(
        max_length=20, unique=True, help_text="Public code of this revision, printed on it and in its QR code."
    )
    kind = models.CharField(max_length=8, choices=DocumentKind.choices)
    mark = models.ForeignKey(Mark, null=True, blank=True, on_delete=models.PROTECT, related_name="documents")
    job = models.ForeignKey(Job, null=True, blank=True, on_delete=models.PROTECT, related_name="documents")
    revision = models.PositiveIntegerField(default=1)
    state = models.CharField(max_length=10, choices=DocumentState.choices, default=DocumentState.DRAFT)
    page_size = models.CharField(max_length=8, choices=PageSize.choices, default=PageSize.A4)
    # The PDF: the prepared bytes until signed, then the signed bytes (the prepared ones plus the signature).
    content = models.BinaryField(editable=False, default=b"")
    size_bytes = models.PositiveIntegerField(default=0)
    sha256 = models.CharField(max_length=64, blank=True)
    page_count = models.PositiveSmallIntegerField(default=0)
    # Where the visible signature goes: page index (0-based) and box in PDF points (x1, y1, x2, y2).
    signature_page = models.PositiveSmallIntegerField(default=0)
    signature_box = models.JSONField(default=list)
    # The signed PDF in file storage as well (written once, when signed).
    pdf = models.FileField(upload_to="documents/%Y/", max_length=400, blank=True)
    # What the document was built from besides the registry (report: statement style, residual file...).
    options = models.JSONField(default=dict, blank=True)
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)
    checked_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    checked_at = models.DateTimeField(null=True, blank=True)
    check_note = models.TextField(blank=True)
    checked_sha256 = models.CharField(max_length=64, blank=True, help_text="SHA-256 of the bytes the checker saw.")
    signed_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    signed_at = models.DateTimeField(null=True, blank=True)
    certificate = models.ForeignKey(
        "registry.SigningCertificate", null=True, blank=True, on_delete=models.PROTECT, related_name="documents"
    )
    supersedes = models.OneToOneField(
        "self", null=True, blank=True, on_delete=models.PROTECT, related_name="superseded_by"
    )
    superseded_at = models.DateTimeField(null=True, blank=True)
    out_of_date = models.BooleanField(default=False)
    out_of_date_at = models.DateTimeField(null=True, blank=True)
    out_of_date_reason = models.TextField(blank=True)

    class Meta:
        ordering = ["-created_at", "-id"]
        constraints = [
            models.CheckConstraint(
                condition=(Q(kind="sheet") & Q(mark__isnull=False) & Q(job__isnull=True))
                | (Q(kind="report") & Q(job__isnull=False) & Q(mark__isnull=True)),
                name="document_subject_matches_kind",
            ),
            models.CheckConstraint(
                condition=~Q(state__in=DOCUMENT_ISSUED_STATES)
                | (
                    Q(signed_by__isnull=False)
                    & Q(signed_at__isnull=False)
                    & Q(certificate__isnull=False)
                    & ~Q(sha256="")
                ),
                name="document_signed_has_signature",
            ),
            models.CheckConstraint(
                condition=~Q(state__in=("checked", "signed", "superseded"))
                | (Q(checked_by__isnull=False) & Q(checked_at__isnull=False)),
                name="document_checked_has_checker",
            ),
            models.UniqueConstraint(fields=["mark", "revision"], name="document_sheet_revision_unique"),
            models.UniqueConstraint(fields=["job", "revision"], name="document_report_revision_unique"),
            # One current (signed) document and one open (draft or checked) document per subject.
            models.UniqueConstraint(fields=["mark"], condition=Q(state="signed"), name="document_one_signed_per_mark"),
            models.UniqueConstraint(fields=["job"], condition=Q(state="signed"), name="document_one_signed_per_job"),
            models.UniqueConstraint(
                fields=["mark"], condition=Q(state__in=("draft", "checked")), name="document_one_open_per_mark"
            ),
            models.UniqueConstraint(
                fields=["job"], condition=Q(state__in=("draft", "checked")), name="document_one_open_per_job"
            ),
        ]
        indexes = [models.Index(fields=["state", "out_of_date"], name="document_state_ood")]

    def __str__(self) -> str:
        return f"{self.get_kind_display()} {self.subject_code} revision {self.revision} ({self.state})"

    @property
    def subject_code(self) -> str:
        if self.kind == DocumentKind.SHEET:
            return self.mark.code if self.mark_id else ""
        return self.job.code if self.job_id else ""

    @property
    def issued(self) -> bool:
        return self.state in DOCUMENT_ISSUED_STATES

    def save(self, *args, **kwargs):
        # The same rule as the triggers of migration 0011, checked first for a clear message.
        if self.pk is not None:
            stored = (
                Document.objects.filter(pk=self.pk)
                .values("state", "out_of_date", *[f for f in DOCUMENT_FROZEN_FIELDS if f != "content"])
                .first()
            )
            if stored and stored["state"] in DOCUMENT_ISSUED_STATES:
                changed = [
                    f for f in DOCUMENT_FROZEN_FIELDS if f != "content" and stored[f] != _comparable(getattr(self, f))
                ]
                if changed:
                    raise DocumentFrozenError(
                        f"Document {stored['code']} is {stored['state']}; its {', '.join(changed)} cannot change."
                    )
                if stored["state"] == "superseded" and self.state != "superseded":
                    raise DocumentFrozenError(f"Document {stored['code']} is superseded; that is final.")
                if stored["state"] == "signed" and self.state not in ("signed", "superseded"):
                    raise DocumentFrozenError(f"Document {stored['code']} is signed; it can only be superseded.")
                if stored["out_of_date"] and not self.out_of_date:
                    raise DocumentFrozenError(f"Document {stored['code']} is out of date; that is final.")
        super().save(*args, **kwargs)

    def delete(self, *args, **kwargs):
        stored = Document.objects.filter(pk=self.pk).values_list("state", flat=True).first()
        if stored in DOCUMENT_ISSUED_STATES:
            raise DocumentFrozenError(f"Document {self.code} is {stored}; issued documents are never deleted.")
        return super().delete(*args, **kwargs)


def _comparable(value):
    """A model attribute as ``values()`` returns it (file fields as their stored name)."""
    if isinstance(value, models.fields.files.FieldFile):
        return value.name or ""
    return value


class DocumentMark(models.Model):
    """A mark whose published position or description a document prints (its sheet, or a report's control)."""

    document = models.ForeignKey(Document, on_delete=models.CASCADE, related_name="covered")
    mark = models.ForeignKey(Mark, on_delete=models.PROTECT, related_name="covered_by_documents")

    class Meta:
        constraints = [models.UniqueConstraint(fields=["document", "mark"], name="document_mark_unique")]


class BuildState(TextChoices):
    QUEUED = "queued", "waiting to start"
    RUNNING = "running", "being built"
    DONE = "done", "built"
    FAILED = "failed", "failed"


class DocumentBuild(models.Model):
    """One request to build a document in the background, with its progress (the page polls it).

    The task writes the document only when the whole PDF is made (one transaction); a failed build
    leaves no document behind, keeps its error, and can be started again.
    """

    kind = models.CharField(max_length=8, choices=DocumentKind.choices)
    mark = models.ForeignKey(Mark, null=True, blank=True, on_delete=models.CASCADE, related_name="+")
    job = models.ForeignKey(Job, null=True, blank=True, on_delete=models.CASCADE, related_name="document_builds")
    options = models.JSONField(default=dict, blank=True)
    requested_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    requested_at = models.DateTimeField(auto_now_add=True)
    state = models.CharField(max_length=8, choices=BuildState.choices, default=BuildState.QUEUED)
    progress = models.FloatField(default=0.0, help_text="0 … 1")
    step = models.CharField(max_length=200, blank=True, help_text="What the build is doing now, in words.")
    error = models.TextField(blank=True)
    task_id = models.CharField(max_length=64, blank=True)
    attempts = models.PositiveSmallIntegerField(default=0)
    started_at = models.DateTimeField(null=True, blank=True)
    finished_at = models.DateTimeField(null=True, blank=True)
    document = models.ForeignKey(Document, null=True, blank=True, on_delete=models.SET_NULL, related_name="+")

    class Meta:
        ordering = ["-requested_at", "-id"]
        constraints = [
            models.CheckConstraint(condition=Q(progress__gte=0, progress__lte=1), name="build_progress_range"),
        ]

    def __str__(self) -> str:
        return f"build {self.pk} of a {self.get_kind_display()} ({self.state})"


__all__ = [
    "DOCUMENT_FROZEN_FIELDS",
    "DOCUMENT_ISSUED_STATES",
    "DOCUMENT_STANDING_FIELDS",
    "BuildState",
    "Document",
    "DocumentBuild",
    "DocumentFrozenError",
    "DocumentKind",
    "DocumentMark",
    "DocumentState",
    "PageSize",
]
