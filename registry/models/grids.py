"""Custom grids: a low-distortion projection or a scaled ground system, stored once by a manager.

The parameters are those of :class:`registry.geodesy.customgrid.CustomGridDefinition`; the service
``registry.services.grids.custom_grid_create`` validates them by building the grid with PROJ. A
stored grid never changes (coordinates computed on it must stay reproducible): a changed design is
a new grid under a new code.
"""

from __future__ import annotations

from django.conf import settings
from django.core.validators import RegexValidator
from django.db import models
from django.db.models import Q

from .choices import TextChoices

#: A grid code: capital letters, digits, '-', '_', '.'; it starts with a letter, so it can never be
#: taken for an EPSG code (a number) where either is accepted.
GRID_CODE_VALIDATOR = RegexValidator(
    r"^[A-Z][A-Z0-9_.\-]{0,31}$",
    "A grid code is 1–32 characters: capital letters, digits, '_', '.', '-', starting with a letter.",
    code="invalid_code",
)


class GridMethod(TextChoices):
    TM = "tm", "transverse Mercator"
    OBLIQUE_STEREOGRAPHIC = "oblique_stereographic", "oblique stereographic"
    LCC_1SP = "lcc_1sp", "Lambert conic conformal (one standard parallel)"
    UTM_SCALED = "utm_scaled", "UTM zone scaled about a point"


class GridUnit(TextChoices):
    METRE = "metre", "metre"
    FOOT = "foot", "international foot (0.3048 m)"
    US_SURVEY_FOOT = "US survey foot", "US survey foot (1200/3937 m; legacy)"


class CustomGrid(models.Model):
    code = models.CharField(max_length=32, unique=True, validators=[GRID_CODE_VALIDATOR])
    name = models.CharField(max_length=200)
    notes = models.TextField(blank=True, help_text="Design notes: purpose, design height, who designed it.")
    frame_epsg = models.PositiveIntegerField(help_text="The geographic 3D frame (datum) the grid projects.")
    method = models.CharField(max_length=24, choices=GridMethod.choices)
    unit = models.CharField(max_length=16, choices=GridUnit.choices, default=GridUnit.METRE)
    lat0_deg = models.FloatField(null=True, blank=True)
    lon0_deg = models.FloatField(null=True, blank=True)
    k0 = models.FloatField(null=True, blank=True)
    false_easting = models.FloatField(null=True, blank=True, help_text="In the grid's unit.")
    false_northing = models.FloatField(null=True, blank=True, help_text="In the grid's unit.")
    utm_zone = models.PositiveSmallIntegerField(null=True, blank=True)
    utm_south = models.BooleanField(default=False)
    anchor_lat_deg = models.FloatField(null=True, blank=True)
    anchor_lon_deg = models.FloatField(null=True, blank=True)
    scale = models.FloatField(null=True, blank=True, help_text="UTM scaled: factor applied about the point.")
    area_west_deg = models.FloatField()
    area_south_deg = models.FloatField()
    area_east_deg = models.FloatField()
    area_north_deg = models.FloatField()
    proj_definition = models.TextField(help_text="The projection as PROJ builds it (metres), for the record.")
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    created_at = models.DateTimeField(auto_now_add=True)

    class Meta:
        ordering = ["code"]
        constraints = [
            models.CheckConstraint(
                condition=Q(area_south_deg__lt=models.F("area_north_deg")), name="customgrid_area_ordered"
            ),
            models.CheckConstraint(
                condition=~Q(method="utm_scaled") | Q(utm_zone__isnull=False, scale__isnull=False),
                name="customgrid_utm_scaled_complete",
            ),
        ]

    def __str__(self) -> str:
        return self.code
