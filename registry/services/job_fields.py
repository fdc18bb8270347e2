"""A job's fields: which exist, their ranges and defaults, and how submitted values are checked.

One place for every caller that turns submitted job fields into values: the job service
(:mod:`registry.services.jobs`), ad-hoc screening (:mod:`registry.services.screening.params`), and
the job form's initial values (:func:`new_job_defaults`). Each check raises a coded
``ValidationError`` (``field_error``); :func:`clean_job_fields` collects every field's errors at once.

Defaults for a new job (documented in README, "search-and-screening"): the model's field defaults for
the RTK error model and setup (8 mm + 1 ppm horizontal, 15 mm + 1 ppm vertical, additive, the
horizontal figure read as 1σ per axis; setup 2 mm / 3 mm; common practice), and the assumed unmodelled
rate, maximum baseline and recovery period from ``settings.REGISTRY`` (2 mm/yr, 10 km, 10 years).
"""

from __future__ import annotations

import datetime as dt
import json
from typing import Any

from django.conf import settings
from django.core.exceptions import ValidationError

from registry.geodesy import site as site_geo
from registry.models import Job, JobStatus, RtkCombination, RtkHorizontalMeaning, VerticalDeliverable
from registry.models.choices import TextChoices
from registry.models.marks import CODE_VALIDATOR
from registry.services._input import field_error
from registry.services.limits import NOTES_MAX

#: Numeric fields: (lower bound, lower bound open?, upper bound, unit words).
NUMBER_RANGES: dict[str, tuple[float, bool, float, str]] = {
    "epoch_yr": (1900.0, False, 2100.0, "a decimal year"),
    "tol_h_mm": (0.0, True, 10_000.0, "mm"),
    "tol_v_mm": (0.0, True, 10_000.0, "mm"),
    "rtk_h_fixed_mm": (0.0, False, 1_000.0, "mm"),
    "rtk_h_ppm": (0.0, False, 100.0, "ppm"),
    "rtk_v_fixed_mm": (0.0, False, 1_000.0, "mm"),
    "rtk_v_ppm": (0.0, False, 100.0, "ppm"),
    "setup_h_mm": (0.0, False, 100.0, "mm"),
    "setup_v_mm": (0.0, False, 100.0, "mm"),
    "assumed_rate_mm_yr": (0.0, False, 100.0, "mm/yr"),
    "assumed_rate_plate_fixed_mm_yr": (0.0, False, 100.0, "mm/yr"),
    "rover_h_mm": (0.0, False, 100.0, "mm"),
    "rover_v_mm": (0.0, False, 100.0, "mm"),
    "max_baseline_m": (0.0, True, 100_000.0, "m"),
    "recovery_years": (0.0, True, 200.0, "years"),
    "grid_spacing_m": (0.0, True, 10_000.0, "m"),
}
TEXT_FIELDS = {"name": 200, "client": 200, "notes": NOTES_MAX}
EDITABLE_FIELDS: tuple[str, ...] = (
    "name",
    "client",
    "status",
    "site_geojson",
    "frame_epsg",
    "epoch_yr",
    "grid_epsg",
    "custom_grid",
    "tol_h_mm",
    "tol_v_mm",
    "rtk_h_fixed_mm",
    "rtk_h_ppm",
    "rtk_v_fixed_mm",
    "rtk_v_ppm",
    "rtk_combination",
    "rtk_h_meaning",
    "setup_h_mm",
    "setup_v_mm",
    "rover_h_mm",
    "rover_v_mm",
    "assumed_rate_mm_yr",
    "assumed_rate_plate_fixed_mm_yr",
    "field_date",
    "vertical_deliverable",
    "max_baseline_m",
    "recovery_years",
    "grid_spacing_m",
    "notes",
)
CREATE_FIELDS: tuple[str, ...] = ("code", *EDITABLE_FIELDS)
REQUIRED_ON_CREATE = ("code", "name", "site_geojson", "frame_epsg", "epoch_yr", "tol_h_mm", "tol_v_mm")
NULLABLE = {"grid_epsg", "custom_grid", "grid_spacing_m", "field_date"}


def settings_defaults() -> dict[str, float]:
    """The job defaults that come from ``settings.REGISTRY`` (read at call time, never at import)."""
    from registry.selectors.conversion import configured_assumed_rates

    cfg = settings.REGISTRY
    return {
        **configured_assumed_rates(),
        "max_baseline_m": float(cfg.get("MAX_BASELINE_M", 10_000.0)),
        "recovery_years": float(cfg.get("RECOVERY_YEARS", 10.0)),
    }


def _number(field: str, value: Any) -> float | None:
    if value is None or value == "":
        if field in NULLABLE:
            return None
        raise field_error(field, "This field is required.", "required")
    if isinstance(value, bool):
        raise field_error(field, "Expected a number.", "invalid_number")
    try:
        x = float(value.strip() if isinstance(value, str) else value)
    except (TypeError, ValueError):
        raise field_error(field, "Expected a number.", "invalid_number") from None
    lo, lo_open, hi, unit = NUMBER_RANGES[field]
    if not (x == x and abs(x) != float("inf")):
        raise field_error(field, "Expected a finite number.", "not_finite")
    if x > hi or x < lo or (lo_open and x == lo):
        bound = f"greater than {lo:g}" if lo_open else f"at least {lo:g}"
        raise field_error(field, f"Must be {bound} and at most {hi:g} ({unit}).", "out_of_range", value=x)
    return x


def _date(field: str, value: Any) -> dt.date | None:
    """A calendar date (``YYYY-MM-DD``) between 1900 and 2100; empty: None."""
    if value is None or value == "":
        return None
    if isinstance(value, dt.datetime):
        value = value.date()
    if not isinstance(value, dt.date):
        try:
            value = dt.date.fromisoformat(str(value).strip())
        except ValueError:
            raise field_error(field, "Expected a date as YYYY-MM-DD.", "invalid_date") from None
    if not dt.date(1900, 1, 1) <= value <= dt.date(2100, 12, 31):
        raise field_error(field, "The date must be between 1900 and 2100.", "out_of_range")
    return value


def _epsg(field: str, value: Any) -> int | None:
    if value is None or value == "":
        if field in NULLABLE:
            return None
        raise field_error(field, "This field is required.", "required")
    if isinstance(value, bool):
        raise field_error(field, "Expected an EPSG code.", "invalid_integer")
    try:
        code = int(value.strip() if isinstance(value, str) else value)
    except (TypeError, ValueError):
        raise field_error(field, "Expected an EPSG code (a whole number).", "invalid_integer") from None
    if isinstance(value, float) and value != code:
        raise field_error(field, "Expected an EPSG code (a whole number).", "invalid_integer")
    if field == "frame_epsg":
        from registry.geodesy.frames import FrameTransformError, frame_info

        try:
            frame_info(code)
        except FrameTransformError as exc:
            raise field_error(field, str(exc), "invalid_frame", value=code) from None
    else:
        import pyproj

        try:
            crs = pyproj.CRS.from_epsg(code)
        except pyproj.exceptions.CRSError:
            raise field_error(
                field, f"EPSG:{code} is not a known coordinate reference system.", "invalid_grid"
            ) from None
        if not crs.is_projected:
            raise field_error(field, f"EPSG:{code} ({crs.name}) is not a projected grid.", "invalid_grid", value=code)
    return code


def _custom_grid(value: Any):
    """A custom grid's code → the stored grid (None for empty)."""
    from registry.models import CustomGrid

    if value is None or value == "":
        return None
    if isinstance(value, CustomGrid):
        return value
    if not isinstance(value, str):
        raise field_error("custom_grid", "Expected a custom grid's code.", "invalid_grid")
    grid = CustomGrid.objects.filter(code=value.strip().upper()).first()
    if grid is None:
        raise field_error(
            "custom_grid", f"No custom grid '{value.strip()}' is stored (see the list of custom grids).", "invalid_grid"
        )
    return grid


def _site(value: Any) -> dict:
    try:
        parsed = site_geo.parse_site_geojson(value)
    except site_geo.SiteError as exc:
        raise field_error("site_geojson", exc.message, exc.code) from None
    obj = json.loads(value) if isinstance(value, str | bytes) else value
    if obj.get("type") == "Feature":
        obj = obj["geometry"]
    del parsed
    return {"type": obj["type"], "coordinates": obj["coordinates"]}


def clean_job_fields(data: Any, allowed: tuple[str, ...]) -> dict[str, Any]:
    """Check keys and convert every submitted value; all field errors at once."""
    if not isinstance(data, dict):
        raise ValidationError("Send the fields as an object.", code="invalid_payload")
    errors: dict[str, list] = {}
    cleaned: dict[str, Any] = {}
    for key, value in data.items():
        try:
            if key not in allowed:
                if key == "code":
                    raise field_error(key, "A job's code is its identity and does not change.", "not_editable")
                if key == "version":
                    raise field_error(key, "Send the version you started from as expected_version.", "not_editable")
                raise field_error(str(key), f"Unknown field '{key}'.", "unknown_field")
            if key == "code":
                code = value.strip() if isinstance(value, str) else value
                if not isinstance(code, str) or not code:
                    raise field_error(key, "A job needs a code.", "required")
                try:
                    CODE_VALIDATOR(code)
                except ValidationError:
                    raise field_error(
                        key, "A job code is 1–32 characters: capital letters, digits, '_', '.', '-'.", "invalid_code"
                    ) from None
                cleaned[key] = code
            elif key in NUMBER_RANGES:
                cleaned[key] = _number(key, value)
            elif key in ("frame_epsg", "grid_epsg"):
                cleaned[key] = _epsg(key, value)
            elif key == "custom_grid":
                cleaned[key] = _custom_grid(value)
            elif key == "field_date":
                cleaned[key] = _date(key, value)
            elif key == "site_geojson":
                cleaned[key] = _site(value)
            elif key in TEXT_FIELDS:
                if value is None:
                    value = ""
                if not isinstance(value, str):
                    raise field_error(key, "Expected text.", "invalid_type")
                value = value.strip()
                if len(value) > TEXT_FIELDS[key]:
                    raise field_error(
                        key,
                        "At most %(limit_value)d characters (this has %(show_value)d).",
                        "max_length",
                        limit_value=TEXT_FIELDS[key],
                        show_value=len(value),
                    )
                cleaned[key] = value
            else:
                lists: dict[str, type[TextChoices]] = {
                    "status": JobStatus,
                    "rtk_combination": RtkCombination,
                    "rtk_h_meaning": RtkHorizontalMeaning,
                    "vertical_deliverable": VerticalDeliverable,
                }
                choices = lists[key]
                if value not in choices.values:
                    raise field_error(key, f"{value!r} is not one of: {', '.join(choices.values)}.", "invalid_choice")
                cleaned[key] = value
        except ValidationError as exc:
            for field, items in exc.error_dict.items():
                errors.setdefault(field, []).extend(items)
    if errors:
        raise ValidationError(errors)
    return cleaned


def validate_job(job: Job) -> None:
    """Checks across fields: the name is there, and the grid spacing suits the site."""
    if not job.name:
        raise field_error("name", "A job needs a name.", "required")
    if job.grid_epsg is not None and job.custom_grid_id is not None:
        raise field_error(
            "custom_grid",
            "Give the deliverable grid either as an EPSG code or as a custom grid, not both.",
            "two_grids",
        )
    if job.custom_grid_id is not None:
        from registry.geodesy.grid import GridError, resolve_grid
        from registry.selectors.grids import grid_crs_of

        try:
            resolve_grid(grid_crs_of(job.custom_grid), frame_epsg=job.frame_epsg)
        except GridError as exc:
            raise field_error("custom_grid", str(exc), "invalid_grid") from None
    if job.grid_spacing_m is not None:
        site = site_geo.parse_site_geojson(job.site_geojson)
        try:
            site_geo.build_site_grid(site, site_geo.site_plane(site), job.grid_spacing_m)
        except site_geo.SiteError as exc:
            raise field_error("grid_spacing_m", exc.message, exc.code) from None


def model_defaults() -> dict[str, Any]:
    """The model's own defaults for the fields a new job may leave out (error model, setup, ...)."""
    return {
        f.name: f.default
        for f in Job._meta.concrete_fields
        if f.name in EDITABLE_FIELDS and f.has_default() and not callable(f.default)
    }


def new_job_defaults() -> dict[str, Any]:
    """Every default a new job gets: the model's, then the registry settings' (which win)."""
    return {**model_defaults(), **settings_defaults()}


def _g(value: float) -> str:
    """A default as a person reads it.

    >>> _g(8.0), _g(0.5), _g(10_000.0)
    ('8', '0.5', '10 000')
    """
    return f"{value:g}" if value < 10_000 else f"{round(value):,d}".replace(",", " ")


def field_help() -> dict[str, str]:
    """The job form's help under a field: the documented defaults (common practice) from the model, so
    the form never states a number of its own."""
    d = model_defaults()
    return {
        "epoch_yr": "e.g. 2025.500",
        "rtk_h_fixed_mm": (
            f"Common practice: {_g(d['rtk_h_fixed_mm'])} mm + {_g(d['rtk_h_ppm'])} ppm horizontal, "
            f"{_g(d['rtk_v_fixed_mm'])} mm + {_g(d['rtk_v_ppm'])} ppm vertical (receiver specifications)."
        ),
        "max_baseline_m": f"Common practice for single-base RTK: {_g(d['max_baseline_m'])} m.",
        "rover_h_mm": (
            f"Common practice for a pole with a checked bubble: {_g(d['rover_h_mm'])} mm centring, "
            f"{_g(d['rover_v_mm'])} mm rod height."
        ),
        "assumed_rate_plate_fixed_mm_yr": "A plate-fixed frame takes out the plate's motion; what remains is small.",
    }
