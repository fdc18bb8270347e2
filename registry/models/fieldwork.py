"""What happened at a mark: occupations, visits (what a crew found) and their files."""

from __future__ import annotations

from django.conf import settings
from django.db import models
from django.db.models import F, Q

from registry.models.marks import Mark, Position

from .choices import TextChoices


class OccupationMethod(TextChoices):
    STATIC_GNSS = "static_gnss", "static GNSS"
    RTK = "rtk", "RTK"
    NETWORK_RTK = "network_rtk", "network RTK"
    LEVELLING = "levelling", "levelling"
    TOTAL_STATION = "total_station", "total station"
    OTHER = "other", "other"


class AntennaHeightKind(TextChoices):
    VERTICAL = "vertical", "vertical to the antenna reference point"
    SLANT = "slant", "slant to the slant-measure point"


class Occupation(models.Model):
    """One session on a mark."""

    mark = models.ForeignKey(Mark, on_delete=models.PROTECT, related_name="occupations")
    method = models.CharField(max_length=16, choices=OccupationMethod.choices)
    start_utc = models.DateTimeField()
    end_utc = models.DateTimeField()
    observer = models.CharField(max_length=120, blank=True)
    receiver = models.CharField(max_length=120, blank=True)
    antenna = models.CharField(max_length=120, blank=True)
    antenna_height_measured_m = models.FloatField(null=True, blank=True)
    antenna_height_kind = models.CharField(
        max_length=10, choices=AntennaHeightKind.choices, default=AntennaHeightKind.VERTICAL
    )
    antenna_height_arp_m = models.FloatField(
        null=True, blank=True, help_text="Vertical mark → antenna reference point, m."
    )
    result_position = models.ForeignKey(
        Position, null=True, blank=True, on_delete=models.PROTECT, related_name="occupations"
    )
    notes = models.TextField(blank=True)
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)

    class Meta:
        ordering = ["mark", "-start_utc"]
        constraints = [
            models.CheckConstraint(condition=Q(end_utc__gte=F("start_utc")), name="occupation_end_after_start"),
            models.CheckConstraint(
                condition=Q(antenna_height_measured_m__isnull=True)
                | Q(antenna_height_measured_m__gte=0, antenna_height_measured_m__lte=10),
                name="occupation_antenna_height_range",
            ),
            models.CheckConstraint(
                condition=Q(antenna_height_arp_m__isnull=True)
                | Q(antenna_height_arp_m__gte=0, antenna_height_arp_m__lte=10),
                name="occupation_arp_height_range",
            ),
        ]

    def __str__(self) -> str:
        return f"{self.mark_id} {self.method} {self.start_utc:%Y-%m-%d}"


class Finding(TextChoices):
    """What a visit found at the mark."""

    INTACT = "intact", "intact"
    DAMAGED = "damaged", "damaged but usable"
    DISTURBED = "disturbed", "disturbed"
    DESTROYED = "destroyed", "destroyed"
    SEARCHED_NOT_FOUND = "searched_not_found", "searched, not found"


#: Findings that make an active mark suspect (registry.services.suspect).
SUSPECT_FINDINGS: tuple[str, ...] = (Finding.DISTURBED, Finding.SEARCHED_NOT_FOUND)


class Visit(models.Model):
    """A visit to a mark: the date, what the crew found, notes and photos."""

    mark = models.ForeignKey(Mark, on_delete=models.PROTECT, related_name="visits")
    visited_on = models.DateField()
    finding = models.CharField(max_length=20, choices=Finding.choices)
    visitor = models.CharField(max_length=120, blank=True)
    notes = models.TextField(blank=True)
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)

    class Meta:
        ordering = ["mark", "-visited_on", "-created_at"]
        indexes = [models.Index(fields=["mark", "visited_on"], name="visit_mark_date")]

    def __str__(self) -> str:
        return f"{self.mark_id} {self.visited_on} {self.finding}"


class AttachmentKind(TextChoices):
    PHOTO = "photo", "photo"
    RINEX = "rinex", "RINEX observation file"
    SKETCH = "sketch", "sketch"
    OTHER = "other", "other file"


def attachment_upload_to(instance: Attachment, filename: str) -> str:
    return f"marks/{instance.mark.code}/{instance.sha256[:2]}/{instance.sha256}/{filename}"


class Attachment(models.Model):
    """A photo or file stored through Django's storage API, with its SHA-256 checksum."""

    mark = models.ForeignKey(Mark, on_delete=models.PROTECT, related_name="attachments")
    occupation = models.ForeignKey(
        Occupation, null=True, blank=True, on_delete=models.PROTECT, related_name="attachments"
    )
    visit = models.ForeignKey(Visit, null=True, blank=True, on_delete=models.PROTECT, related_name="attachments")
    kind = models.CharField(max_length=8, choices=AttachmentKind.choices)
    file = models.FileField(upload_to=attachment_upload_to, max_length=400)
    original_name = models.CharField(max_length=255)
    sha256 = models.CharField(max_length=64)
    size_bytes = models.PositiveBigIntegerField()
    caption = models.CharField(max_length=200, blank=True)
    uploaded_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    uploaded_at = models.DateTimeField(auto_now_add=True)

    class Meta:
        ordering = ["mark", "-uploaded_at"]

    def __str__(self) -> str:
        return f"{self.mark_id} {self.kind} {self.original_name}"
