"""What a screening needs besides the marks: the settings of a stored job, or of an ad-hoc site.

Ad-hoc settings are checked exactly as a job's fields are (same codes), through the public field
checks of :mod:`registry.services.job_fields`, and get the same defaults a new job gets.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from django.core.exceptions import ValidationError

from registry.geodesy import rtk
from registry.geodesy import site as site_geo
from registry.geodesy.frames import frame_info
from registry.models import Job
from registry.selectors.conversion import configured_plate
from registry.services.job_fields import EDITABLE_FIELDS, clean_job_fields, new_job_defaults, validate_job

#: Fields an ad-hoc screening accepts (a job's, without those that only describe the job).
AD_HOC_FIELDS: tuple[str, ...] = tuple(
    f for f in EDITABLE_FIELDS if f not in ("name", "client", "status", "notes", "grid_epsg")
)
AD_HOC_REQUIRED = ("site_geojson", "frame_epsg", "epoch_yr", "tol_h_mm", "tol_v_mm")
#: The vertical σ used for an orthometric deliverable when only the global fallback model is available (mm).
#: Deliberately large: a global model's height is never presented as survey grade.
EGM96_RELATIVE_SIGMA_MM = 100.0


@dataclass(frozen=True)
class ScreeningSettings:
    """Everything a screening needs besides the marks (from a job, or given ad hoc)."""

    site: site_geo.Site
    site_geojson: dict
    frame_epsg: int
    epoch_yr: float
    tol_h_mm: float
    tol_v_mm: float
    model: rtk.RtkErrorModel
    assumed_rate_mm_yr: float
    max_baseline_m: float
    recovery_years: float
    grid_spacing_m: float | None = None
    job_code: str | None = None
    #: Plate of the ITRF2020 plate motion model (``REGISTRY["PLATE"]``); "" applies none.
    plate: str = ""
    #: Assumed unmodelled rate (mm/yr per axis) used when the job's frame is plate-fixed.
    assumed_rate_plate_fixed_mm_yr: float = 0.5
    #: When the crew observes; None: the screening's date (``as_of``, default today).
    field_date: dt.date | None = None
    #: "ellipsoidal" or "orthometric" (the office geoid model, with its stated σ below).
    vertical_deliverable: str = "ellipsoidal"
    #: Stated 1σ of the geoid model (mm; ``REGISTRY["GEOID_SIGMA_MM"]``), used for orthometric deliverables.
    geoid_sigma_mm: float = 0.0
    #: The geoid model's name as shown to the user ("" when none is configured).
    geoid_label: str = ""
    #: The deliverable grid: an EPSG code, a custom grid (GridCRS), or "utm" (the zone of each point).
    grid: object = "utm"

    @property
    def site_radius_m(self) -> float:
        return site_geo.site_radius_m(self.site, site_geo.site_plane(self.site))

    @property
    def frame_is_dynamic(self) -> bool:
        """True for a dynamic frame (ITRF realisations, WGS 84): marks move with their plate in it."""
        return frame_info(self.frame_epsg).kind != "plate-fixed"

    @property
    def epoch_rate_mm_yr(self) -> float:
        """The assumed unmodelled rate (mm/yr per axis) for the job's kind of frame."""
        return self.assumed_rate_mm_yr if self.frame_is_dynamic else self.assumed_rate_plate_fixed_mm_yr

    @property
    def geoid_v_mm(self) -> float:
        """The vertical budget's geoid term: the model's σ for orthometric deliverables, else 0."""
        return self.geoid_sigma_mm if self.vertical_deliverable == "orthometric" else 0.0


def settings_from_job(job: Job) -> ScreeningSettings:
    """The screening settings of a stored (or unsaved, validated) job."""
    site = site_geo.parse_site_geojson(job.site_geojson)
    return ScreeningSettings(
        site=site,
        site_geojson=job.site_geojson,
        frame_epsg=job.frame_epsg,
        epoch_yr=job.epoch_yr,
        tol_h_mm=job.tol_h_mm,
        tol_v_mm=job.tol_v_mm,
        model=rtk.RtkErrorModel(
            h_fixed_mm=job.rtk_h_fixed_mm,
            h_ppm=job.rtk_h_ppm,
            v_fixed_mm=job.rtk_v_fixed_mm,
            v_ppm=job.rtk_v_ppm,
            combination=job.rtk_combination,
            h_meaning=job.rtk_h_meaning,
            setup_h_mm=job.setup_h_mm,
            setup_v_mm=job.setup_v_mm,
            rover_h_mm=job.rover_h_mm,
            rover_v_mm=job.rover_v_mm,
        ),
        assumed_rate_mm_yr=job.assumed_rate_mm_yr,
        max_baseline_m=job.max_baseline_m,
        recovery_years=job.recovery_years,
        grid_spacing_m=job.grid_spacing_m,
        job_code=job.code,
        plate=configured_plate() or "",
        assumed_rate_plate_fixed_mm_yr=job.assumed_rate_plate_fixed_mm_yr,
        field_date=job.field_date,
        vertical_deliverable=job.vertical_deliverable,
        grid=_job_grid(job),
        **_geoid_settings(),
    )


def _job_grid(job: Job):
    """The job's deliverable grid for :func:`registry.geodesy.grid.to_grid`."""
    if job.grid_epsg:
        return int(job.grid_epsg)
    if job.custom_grid_id:
        from registry.selectors.grids import grid_crs_of

        return grid_crs_of(job.custom_grid)
    return "utm"


def _geoid_settings() -> dict:
    """The office geoid model's label and its stated σ (the EGM96 fallback states its global-model error)."""
    from django.conf import settings

    from registry.geodesy.heights import EGM96_LABEL

    cfg = settings.REGISTRY
    name = cfg.get("GEOID_NAME") or cfg.get("GEOID_MODEL") or ""
    if name:
        return {"geoid_label": name, "geoid_sigma_mm": float(cfg.get("GEOID_SIGMA_MM", 15.0))}
    # Global model: its errors reach decimetres (Lemoine et al. 1998, NASA/TP-1998-206861); between a base and
    # a rover a few km apart the error of the difference is smaller, but it is not survey grade either way.
    return {"geoid_label": EGM96_LABEL, "geoid_sigma_mm": EGM96_RELATIVE_SIGMA_MM}


def settings_from_data(data: dict) -> ScreeningSettings:
    """Ad-hoc screening settings, validated exactly as a job's fields are (same codes)."""
    cleaned = clean_job_fields(data, AD_HOC_FIELDS)
    missing = [f for f in AD_HOC_REQUIRED if cleaned.get(f) is None]
    if missing:
        raise ValidationError({f: ValidationError("This field is required.", code="required") for f in missing})
    job = Job(code="AD-HOC", name="ad-hoc site", **{**new_job_defaults(), **cleaned})
    validate_job(job)
    s = settings_from_job(job)
    return ScreeningSettings(**{**s.__dict__, "job_code": None})
