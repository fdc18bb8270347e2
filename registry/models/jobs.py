"""Survey jobs that need control, with the settings of their base screening."""

from __future__ import annotations

from django.conf import settings
from django.db import models
from django.db.models import Q

from .choices import TextChoices


class RtkCombination(TextChoices):
    ADDITIVE = "additive", "additive (a + b·d, as receiver specifications quote it)"
    RSS = "rss", "root-sum-square √(a² + (b·d)²)"


class RtkHorizontalMeaning(TextChoices):
    PER_AXIS = "per_axis", "1σ per horizontal axis"
    DRMS = "drms", "2D RMS (σ_E² + σ_N²)^½"


class VerticalDeliverable(TextChoices):
    ELLIPSOIDAL = "ellipsoidal", "ellipsoidal heights in the deliverable frame"
    ORTHOMETRIC = "orthometric", "orthometric heights (the office's geoid model)"


class JobStatus(TextChoices):
    PLANNING = "planning", "planning"
    ACTIVE = "active", "in the field"
    CLOSED = "closed", "closed"


class Job(models.Model):
    code = models.CharField(max_length=32, unique=True)
    name = models.CharField(max_length=200)
    client = models.CharField(max_length=200, blank=True)
    status = models.CharField(max_length=10, choices=JobStatus.choices, default=JobStatus.PLANNING)
    site_geojson = models.JSONField(help_text="GeoJSON Point or Polygon (RFC 7946, WGS 84 longitude/latitude).")
    frame_epsg = models.PositiveIntegerField(help_text="Deliverable frame: EPSG code of a geographic 3D CRS.")
    epoch_yr = models.FloatField(help_text="Deliverable coordinate epoch, decimal year.")
    grid_epsg = models.PositiveIntegerField(
        null=True, blank=True, help_text="Deliverable grid (EPSG); empty: UTM zone chosen automatically."
    )
    custom_grid = models.ForeignKey(
        "registry.CustomGrid",
        to_field="code",
        null=True,
        blank=True,
        on_delete=models.PROTECT,
        related_name="jobs",
        help_text="Deliverable grid as one of the office's custom grids (instead of an EPSG code).",
    )
    tol_h_mm = models.FloatField(help_text="Horizontal tolerance, 95 % circle, mm.")
    tol_v_mm = models.FloatField(help_text="Vertical tolerance, 95 %, mm.")
    rtk_h_fixed_mm = models.FloatField(default=8.0)
    rtk_h_ppm = models.FloatField(default=1.0)
    rtk_v_fixed_mm = models.FloatField(default=15.0)
    rtk_v_ppm = models.FloatField(default=1.0)
    rtk_combination = models.CharField(max_length=10, choices=RtkCombination.choices, default=RtkCombination.ADDITIVE)
    rtk_h_meaning = models.CharField(
        max_length=10, choices=RtkHorizontalMeaning.choices, default=RtkHorizontalMeaning.PER_AXIS
    )
    setup_h_mm = models.FloatField(default=2.0, help_text="Centring error per horizontal axis, 1σ, mm.")
    setup_v_mm = models.FloatField(default=3.0, help_text="Antenna height error, 1σ, mm.")
    assumed_rate_mm_yr = models.FloatField(
        default=2.0, help_text="Unmodelled motion per axis for marks without a velocity, in a dynamic frame."
    )
    assumed_rate_plate_fixed_mm_yr = models.FloatField(
        default=0.5, help_text="Unmodelled motion per axis for marks without a velocity, in a plate-fixed frame."
    )
    field_date = models.DateField(
        null=True, blank=True, help_text="When the crew will observe; empty: the day the screening is run."
    )
    rover_h_mm = models.FloatField(default=2.0, help_text="Rover pole centring per horizontal axis, 1σ, mm.")
    rover_v_mm = models.FloatField(default=3.0, help_text="Rover rod height error, 1σ, mm.")
    vertical_deliverable = models.CharField(
        max_length=12, choices=VerticalDeliverable.choices, default=VerticalDeliverable.ELLIPSOIDAL
    )
    max_baseline_m = models.FloatField(default=10000.0)
    recovery_years = models.FloatField(default=10.0, help_text="A base needs a good visit within this many years.")
    grid_spacing_m = models.FloatField(
        null=True, blank=True, help_text="Site evaluation grid spacing; empty: chosen from the site size."
    )
    notes = models.TextField(blank=True)
    version = models.PositiveIntegerField(default=1)
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)
    updated_at = models.DateTimeField(auto_now=True)

    class Meta:
        ordering = ["code"]
        constraints = [
            models.CheckConstraint(condition=Q(tol_h_mm__gt=0, tol_v_mm__gt=0), name="job_tolerances_positive"),
            models.CheckConstraint(condition=Q(epoch_yr__gte=1900, epoch_yr__lte=2100), name="job_epoch_range"),
            models.CheckConstraint(
                condition=Q(rtk_h_fixed_mm__gte=0, rtk_h_ppm__gte=0, rtk_v_fixed_mm__gte=0, rtk_v_ppm__gte=0),
                name="job_rtk_model_nonneg",
            ),
            models.CheckConstraint(
                condition=Q(setup_h_mm__gte=0, setup_v_mm__gte=0, assumed_rate_mm_yr__gte=0), name="job_budget_nonneg"
            ),
            models.CheckConstraint(condition=Q(max_baseline_m__gt=0, recovery_years__gt=0), name="job_limits_positive"),
            models.CheckConstraint(
                condition=Q(rover_h_mm__gte=0, rover_v_mm__gte=0, assumed_rate_plate_fixed_mm_yr__gte=0),
                name="job_rover_and_rates_nonneg",
            ),
            models.CheckConstraint(
                condition=Q(grid_spacing_m__isnull=True) | Q(grid_spacing_m__gt=0), name="job_grid_spacing_positive"
            ),
            models.CheckConstraint(
                condition=Q(grid_epsg__isnull=True) | Q(custom_grid__isnull=True), name="job_one_grid"
            ),
        ]

    def __str__(self) -> str:
        return self.code
