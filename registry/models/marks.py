"""Marks and their positions and height records."""

from __future__ import annotations

from contextlib import contextmanager
from contextvars import ContextVar

from django.conf import settings
from django.core.validators import RegexValidator
from django.db import models
from django.db.models import Q

from .choices import TextChoices

CODE_VALIDATOR = RegexValidator(
    r"^[A-Z0-9][A-Z0-9_.-]{0,31}$",
    message="A mark code is 1–32 characters: capital letters, digits, '_', '.', '-'.",
    code="invalid_code",
)


class MarkStatus(TextChoices):
    """A mark's status. ``suspect`` is set and cleared only by the services (``registry.services.suspect``):
    a visit that found the mark disturbed or did not find it, and cleared by a newly published position
    or a manager's clearance."""

    ACTIVE = "active", "active"
    SUSPECT = "suspect", "suspect — awaiting re-observation"
    RETIRED = "retired", "retired"
    DESTROYED = "destroyed", "destroyed"


class MonumentKind(TextChoices):
    """The kind of monument (the mark's ``monument`` field)."""

    DISK_ROCK = "disk_rock", "disk set in rock outcrop"
    DISK_CONCRETE = "disk_concrete", "disk in concrete post"
    DEEP_ROD = "deep_rod", "deep driven rod in sleeve"
    PILLAR = "pillar", "concrete pillar with forced centring"
    BOLT_STRUCTURE = "bolt_structure", "bolt in structure"
    PIN_CONCRETE = "pin_concrete", "pin in concrete"
    IRON_PIPE = "iron_pipe", "iron pipe or bar"
    NAIL = "nail", "nail or spike in pavement"
    OTHER = "other", "other"


class Stability(TextChoices):
    """Our own scale of how well a monument is expected to hold its position."""

    HIGH = "high", "high (bedrock, deep rod, pillar)"
    MODERATE = "moderate", "moderate (massive structure, deep post)"
    LOW = "low", "low (shallow post, pavement)"
    UNKNOWN = "unknown", "unknown"


class SkyView(TextChoices):
    CLEAR = "clear", "clear"
    PARTIAL = "partial", "partly obstructed"
    OBSTRUCTED = "obstructed", "obstructed"
    UNKNOWN = "unknown", "not assessed"


#: The mark description block, in the order pages, files and documents show it.
DESCRIPTION_FIELDS: tuple[str, ...] = (
    "access_directions",
    "monument",
    "monument_detail",
    "marking",
    "stability",
    "sky_view",
    "keeper",
)


class Mark(models.Model):
    code = models.CharField(max_length=32, unique=True, validators=[CODE_VALIDATOR])
    name = models.CharField(max_length=120, blank=True)
    # The description block, in display order (DESCRIPTION_FIELDS below).
    access_directions = models.TextField("access directions", blank=True)
    monument = models.CharField(max_length=20, choices=MonumentKind.choices, default=MonumentKind.OTHER)
    monument_detail = models.CharField("how it is set", max_length=200, blank=True)
    marking = models.CharField("marking as inscribed", max_length=120, blank=True)
    stability = models.CharField(
        "expected stability", max_length=10, choices=Stability.choices, default=Stability.UNKNOWN
    )
    sky_view = models.CharField(max_length=12, choices=SkyView.choices, default=SkyView.UNKNOWN)
    keeper = models.CharField(max_length=120, blank=True, help_text="Who looks after the mark or the land it is on.")
    status = models.CharField(max_length=10, choices=MarkStatus.choices, default=MarkStatus.ACTIVE)
    # Why and since when the mark is suspect (kept by registry.services.suspect; empty otherwise).
    suspect_since = models.DateField(null=True, blank=True)
    suspect_reason = models.CharField(max_length=200, blank=True)
    notes = models.TextField(blank=True)
    # Search location: latitude/longitude of the current published position (kept by services).
    # On PostgreSQL a generated geography column (geog) follows these two; see migration 0002.
    search_lat_deg = models.FloatField(null=True, blank=True)
    search_lon_deg = models.FloatField(null=True, blank=True)
    version = models.PositiveIntegerField(default=1, help_text="Optimistic-concurrency version.")
    created_at = models.DateTimeField(auto_now_add=True)
    updated_at = models.DateTimeField(auto_now=True)

    class Meta:
        ordering = ["code"]
        indexes = [models.Index(fields=["search_lat_deg", "search_lon_deg"], name="mark_search_latlon")]
        constraints = [
            models.CheckConstraint(
                condition=Q(search_lat_deg__isnull=True) | Q(search_lat_deg__gte=-90, search_lat_deg__lte=90),
                name="mark_search_lat_range",
            ),
            models.CheckConstraint(
                condition=Q(search_lon_deg__isnull=True) | Q(search_lon_deg__gte=-180, search_lon_deg__lte=180),
                name="mark_search_lon_range",
            ),
            models.CheckConstraint(
                condition=(Q(search_lat_deg__isnull=True) & Q(search_lon_deg__isnull=True))
                | (Q(search_lat_deg__isnull=False) & Q(search_lon_deg__isnull=False)),
                name="mark_search_both_or_none",
            ),
        ]
        permissions = [
            ("view_registry", "Can search and read the registry"),
            ("record_fieldwork", "Can record occupations, visits, photos and imports"),
            ("manage_marks", "Can edit marks, publish positions, plan jobs"),
            ("sign_documents", "Can check and sign sheets and reports"),
            ("administer_registry", "Can manage users, roles and settings"),
        ]

    def __str__(self) -> str:
        return self.code


class PositionState(TextChoices):
    PROPOSED = "proposed", "proposed"
    PUBLISHED = "published", "published"
    SUPERSEDED = "superseded", "superseded"
    REJECTED = "rejected", "rejected"
    WITHDRAWN = "withdrawn", "withdrawn"


# Fields of a position that never change once it is published (or later superseded).
POSITION_FROZEN_FIELDS = (
    "mark_id",
    "frame_epsg",
    "epoch_yr",
    "lat_deg",
    "lon_deg",
    "h_m",
    "cov_ee_m2",
    "cov_en_m2",
    "cov_eu_m2",
    "cov_nn_m2",
    "cov_nu_m2",
    "cov_uu_m2",
    "vel_e_m_yr",
    "vel_n_m_yr",
    "vel_u_m_yr",
    "vel_sigma_e_m_yr",
    "vel_sigma_n_m_yr",
    "vel_sigma_u_m_yr",
    "source",
)


# Positions are history: once published, a position is never deleted, and it moves only forward.
# States whose rows may never be deleted (and whose POSITION_FROZEN_FIELDS never change).
POSITION_HISTORY_STATES = ("published", "superseded", "withdrawn")
# The only state changes allowed (anything else, e.g. superseded → published, is refused).
POSITION_TRANSITIONS = {
    "proposed": ("published", "rejected"),
    "published": ("superseded", "withdrawn"),
}
# Fields that may change on any position (decisions and bookkeeping); with POSITION_FROZEN_FIELDS and
# "id" this lists every column, so a new field has to be put in one list or the other (tests check it).
POSITION_MUTABLE_FIELDS = (
    "state",
    "note",
    "created_by_id",
    "created_at",
    "decided_by_id",
    "decided_at",
    "superseded_at",
    "superseded_by_id",
)

_history_delete_allowed: ContextVar[bool] = ContextVar("position_history_delete_allowed", default=False)


class FrozenPositionError(Exception):
    """A published, superseded or withdrawn position's coordinates may never change."""

    code = "position_frozen"


class PositionStateError(FrozenPositionError):
    """A state change outside POSITION_TRANSITIONS (e.g. superseded → published)."""

    code = "position_state"


class PositionHistoryError(FrozenPositionError):
    """A published, superseded or withdrawn position may never be deleted."""

    code = "position_history"


@contextmanager
def position_history_delete_allowed():
    """Let the ORM delete history positions inside this block (``load_demo --reset`` only).

    The database triggers of migration 0005 still refuse unless they are lifted too.
    """
    token = _history_delete_allowed.set(True)
    try:
        yield
    finally:
        _history_delete_allowed.reset(token)


class PositionQuerySet(models.QuerySet):
    def delete(self):
        if not _history_delete_allowed.get():
            kept = list(self.filter(state__in=POSITION_HISTORY_STATES).values_list("pk", "state")[:5])
            if kept:
                pk, state = kept[0]
                raise PositionHistoryError(
                    f"Position {pk} is {state}; published, superseded and withdrawn positions are kept "
                    "as history and never deleted."
                )
        return super().delete()

    delete.alters_data = True
    delete.queryset_only = True


class Position(models.Model):
    """One coordinate solution of a mark, in a geographic 3D frame at a coordinate epoch.

    Covariance is in the local east/north/up frame at the point, in m².
    """

    mark = models.ForeignKey(Mark, on_delete=models.PROTECT, related_name="positions")
    frame_epsg = models.PositiveIntegerField(help_text="EPSG code of a geographic 3D CRS.")
    epoch_yr = models.FloatField(help_text="Coordinate epoch, decimal year.")
    lat_deg = models.FloatField()
    lon_deg = models.FloatField()
    h_m = models.FloatField(help_text="Ellipsoidal height, m.")
    cov_ee_m2 = models.FloatField()
    cov_en_m2 = models.FloatField(default=0.0)
    cov_eu_m2 = models.FloatField(default=0.0)
    cov_nn_m2 = models.FloatField()
    cov_nu_m2 = models.FloatField(default=0.0)
    cov_uu_m2 = models.FloatField()
    vel_e_m_yr = models.FloatField(null=True, blank=True)
    vel_n_m_yr = models.FloatField(null=True, blank=True)
    vel_u_m_yr = models.FloatField(null=True, blank=True)
    vel_sigma_e_m_yr = models.FloatField(null=True, blank=True)
    vel_sigma_n_m_yr = models.FloatField(null=True, blank=True)
    vel_sigma_u_m_yr = models.FloatField(null=True, blank=True)
    source = models.CharField(
        max_length=200, help_text="Where the solution came from (campaign, adjustment, occupation)."
    )
    state = models.CharField(max_length=10, choices=PositionState.choices, default=PositionState.PROPOSED)
    note = models.TextField(blank=True)
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)
    decided_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    decided_at = models.DateTimeField(null=True, blank=True, help_text="When published, rejected or withdrawn.")
    superseded_at = models.DateTimeField(null=True, blank=True)
    superseded_by = models.ForeignKey(
        "self", null=True, blank=True, on_delete=models.PROTECT, related_name="supersedes"
    )

    objects = PositionQuerySet.as_manager()

    class Meta:
        ordering = ["mark", "-epoch_yr", "-created_at"]
        indexes = [models.Index(fields=["mark", "state"], name="position_mark_state")]
        constraints = [
            models.CheckConstraint(condition=Q(lat_deg__gte=-90, lat_deg__lte=90), name="position_lat_range"),
            models.CheckConstraint(condition=Q(lon_deg__gte=-180, lon_deg__lte=180), name="position_lon_range"),
            models.CheckConstraint(condition=Q(h_m__gte=-1000, h_m__lte=10000), name="position_h_range"),
            models.CheckConstraint(condition=Q(epoch_yr__gte=1900, epoch_yr__lte=2100), name="position_epoch_range"),
            models.CheckConstraint(
                # services.position_rules: every variance > 0 and ≤ (100 m)²
                condition=Q(cov_ee_m2__gt=0, cov_nn_m2__gt=0, cov_uu_m2__gt=0)
                & Q(cov_ee_m2__lte=1e4, cov_nn_m2__lte=1e4, cov_uu_m2__lte=1e4),
                name="position_variances_positive",
            ),
            models.CheckConstraint(
                condition=Q(vel_sigma_e_m_yr__isnull=True) | Q(vel_sigma_e_m_yr__gte=0),
                name="position_vel_sigma_e_nonneg",
            ),
            models.CheckConstraint(
                condition=Q(vel_sigma_n_m_yr__isnull=True) | Q(vel_sigma_n_m_yr__gte=0),
                name="position_vel_sigma_n_nonneg",
            ),
            models.CheckConstraint(
                condition=Q(vel_sigma_u_m_yr__isnull=True) | Q(vel_sigma_u_m_yr__gte=0),
                name="position_vel_sigma_u_nonneg",
            ),
            models.UniqueConstraint(
                fields=["mark", "frame_epsg"],
                condition=Q(state="published"),
                name="position_one_published_per_mark_frame",
            ),
        ]

    def __str__(self) -> str:
        return f"{self.mark_id}: EPSG:{self.frame_epsg} @ {self.epoch_yr:.3f} ({self.state})"

    @property
    def has_velocity(self) -> bool:
        return self.vel_e_m_yr is not None and self.vel_n_m_yr is not None and self.vel_u_m_yr is not None

    def save(self, *args, **kwargs):
        # The same rules as the triggers of migrations 0003 and 0005, checked first for a clear message.
        if self.pk is not None:
            stored = Position.objects.filter(pk=self.pk).values(*POSITION_FROZEN_FIELDS, "state").first()
            if stored and stored["state"] in POSITION_HISTORY_STATES:
                changed = [f for f in POSITION_FROZEN_FIELDS if stored[f] != getattr(self, f)]
                if changed:
                    raise FrozenPositionError(
                        f"Position {self.pk} is {stored['state']}; its {', '.join(changed)} cannot change."
                    )
            if (
                stored
                and stored["state"] != self.state
                and self.state not in POSITION_TRANSITIONS.get(stored["state"], ())
            ):
                allowed = POSITION_TRANSITIONS.get(stored["state"], ())
                raise PositionStateError(
                    f"Position {self.pk} is {stored['state']}; it cannot become {self.state} "
                    f"(allowed: {', '.join(allowed) if allowed else 'none, it is final'})."
                )
        super().save(*args, **kwargs)

    def delete(self, *args, **kwargs):
        if not _history_delete_allowed.get():
            stored = Position.objects.filter(pk=self.pk).values_list("state", flat=True).first()
            if stored in POSITION_HISTORY_STATES:
                raise PositionHistoryError(
                    f"Position {self.pk} is {stored}; published, superseded and withdrawn positions are kept "
                    "as history and never deleted."
                )
        return super().delete(*args, **kwargs)


class HeightMethod(TextChoices):
    LEVELLED = "levelled", "levelled"
    GEOID = "geoid", "ellipsoidal height minus geoid model N"


class HeightRecord(models.Model):
    """An orthometric height of a mark in a vertical datum."""

    mark = models.ForeignKey(Mark, on_delete=models.PROTECT, related_name="heights")
    datum_epsg = models.PositiveIntegerField(help_text="EPSG code of the vertical CRS.")
    height_m = models.FloatField()
    sigma_m = models.FloatField()
    method = models.CharField(max_length=10, choices=HeightMethod.choices)
    geoid_model = models.CharField(max_length=120, blank=True, help_text="Geoid model used when method is 'geoid'.")
    epoch_yr = models.FloatField(null=True, blank=True)
    source = models.CharField(max_length=200, blank=True)
    current = models.BooleanField(default=True)
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)

    class Meta:
        ordering = ["mark", "-created_at"]
        constraints = [
            models.CheckConstraint(condition=Q(sigma_m__gte=0), name="height_sigma_nonneg"),
            models.CheckConstraint(condition=Q(height_m__gte=-1000, height_m__lte=10000), name="height_range"),
            models.CheckConstraint(condition=~Q(method="geoid") | ~Q(geoid_model=""), name="height_geoid_model_named"),
            models.UniqueConstraint(
                fields=["mark", "datum_epsg"], condition=Q(current=True), name="height_one_current_per_datum"
            ),
        ]

    def __str__(self) -> str:
        return f"{self.mark_id}: {self.height_m:.3f} m EPSG:{self.datum_epsg}"


__all__ = [
    "CODE_VALIDATOR",
    "FrozenPositionError",
    "HeightMethod",
    "HeightRecord",
    "Mark",
    "DESCRIPTION_FIELDS",
    "MarkStatus",
    "MonumentKind",
    "POSITION_FROZEN_FIELDS",
    "POSITION_HISTORY_STATES",
    "POSITION_MUTABLE_FIELDS",
    "POSITION_TRANSITIONS",
    "Position",
    "PositionHistoryError",
    "PositionState",
    "PositionStateError",
    "SkyView",
    "Stability",
    "position_history_delete_allowed",
]
