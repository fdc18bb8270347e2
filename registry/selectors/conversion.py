"""Point conversion for the command, the page and the API: one function, settings applied here.

The computation is the pure :func:`registry.geodesy.convert.convert_point`; this module adds what
depends on the office's configuration:

- the geoid model (``REGISTRY["GEOID_MODEL"]`` in ``REGISTRY["GEOID_DIR"]``, with the frame its
  ellipsoidal heights are in, ``REGISTRY["GEOID_FRAME"]``; else the labelled EGM96 fallback, whose
  frame is stated in :mod:`registry.geodesy.heights`);
- the assumed rates for epoch changes without a velocity (``REGISTRY["ASSUMED_RATE_MM_YR"]`` in a dynamic
  frame, ``REGISTRY["ASSUMED_RATE_PLATE_FIXED_MM_YR"]`` in a plate-fixed one: :func:`configured_assumed_rates`);
- the plate rule for such epoch changes in a dynamic frame (``REGISTRY["PLATE"]``: ``AUTO`` — each
  point's plate from its location —, the office's plate code — points located on another plate are
  refused —, or empty: none, the result then carries a warning that plate motion is not modelled).
  A plate or a velocity given for one conversion overrides the setting;
- custom grids: a grid (or input grid) given as a custom grid's code is looked up here
  (:func:`registry.selectors.grids.resolve_grid_choice`).

Screening and the re-observation check take the plate rule from :func:`configured_plate` too.
"""

from __future__ import annotations

from pathlib import Path

from django.conf import settings

from registry.geodesy.convert import ConversionError, PointConversion, convert_point
from registry.geodesy.heights import GeoidModel, egm96_fallback
from registry.geodesy.projsetup import find_grid
from registry.selectors.grids import UnknownGrid, resolve_grid_choice

__all__ = ["configured_geoid", "configured_plate", "point_convert"]


def configured_plate() -> str | None:
    """``REGISTRY["PLATE"]`` upper-cased: "AUTO", a plate code, or None when the setting is empty."""
    value = (settings.REGISTRY.get("PLATE") or "").strip().upper()
    return value or None


def configured_assumed_rates() -> dict[str, float]:
    """The office's assumed unmodelled rates (mm/yr per axis) for a point without a velocity, by the kind of
    frame its coordinates are held in: ``assumed_rate_mm_yr`` (dynamic, e.g. ITRF) and
    ``assumed_rate_plate_fixed_mm_yr`` (plate-fixed, e.g. NAD83(2011)). Conversions and movement checks use
    them as they are; a new job takes them as its defaults (``services.job_fields.settings_defaults``)."""
    cfg = settings.REGISTRY
    return {
        "assumed_rate_mm_yr": float(cfg.get("ASSUMED_RATE_MM_YR", 2.0)),
        "assumed_rate_plate_fixed_mm_yr": float(cfg.get("ASSUMED_RATE_PLATE_FIXED_MM_YR", 0.5)),
    }


def _geoid_frame() -> int | None:
    raw = str(settings.REGISTRY.get("GEOID_FRAME") or "").strip().upper().removeprefix("EPSG:")
    return int(raw) if raw.isdigit() else None


def configured_geoid() -> tuple[GeoidModel | None, str | None]:
    """The geoid model to use and, if the configured one is missing, a note saying so.

    Order: the office's grid (``GEOID_MODEL`` found in ``GEOID_DIR`` or on PROJ's path, its frame
    from ``GEOID_FRAME``), then EGM96 (approximate, labelled, its frame ITRF2014), then None.
    """
    reg = settings.REGISTRY
    geoid_dir = reg.get("GEOID_DIR") or ""
    name = (reg.get("GEOID_MODEL") or "").strip()
    note = None
    if name:
        path = find_grid(name, dirs=[geoid_dir])
        if path:
            label = reg.get("GEOID_NAME") or Path(name).stem
            frame = _geoid_frame()
            frame_note = (
                f"the office's model; its ellipsoidal heights are in EPSG:{frame} (REGISTRY_GEOID_FRAME)"
                if frame
                else ""
            )
            return GeoidModel(name=label, grid=path, approximate=False, frame_epsg=frame, frame_note=frame_note), None
        note = f"The office geoid grid '{name}' was not found in {geoid_dir}; falling back to the global model."
    fallback = egm96_fallback(dirs=[geoid_dir])
    if Path(fallback.grid).is_absolute():
        return fallback, note
    return None, note


def point_convert(**inputs) -> PointConversion:
    """Convert one point; ``inputs`` as for :func:`registry.geodesy.convert.convert_point`.

    ``plate`` in ``inputs`` (a plate code or "AUTO") is the user's choice for this conversion and
    overrides the office's setting; ``velocity_enu_m_yr`` (m/yr, in the input frame) overrides both.
    ``grid`` and ``grid_in`` may be a custom grid's code.

    Access: the page and the API allow the viewer role and above (checked there, before calling);
    the command line runs with the server's own rights. Bad input raises
    ``registry.geodesy.convert.ConversionError`` (with ``code`` and ``field``) and changes nothing.
    """
    geoid, note = configured_geoid()
    asked_plate = inputs.pop("plate", None)
    for key in ("grid", "grid_in"):
        if key in inputs:
            try:
                inputs[key] = resolve_grid_choice(inputs[key])
            except UnknownGrid as exc:
                raise ConversionError(str(exc), code=exc.code, field=key) from None
    rates = configured_assumed_rates()
    result = convert_point(
        geoid=geoid,
        assumed_rate_mm_yr=rates["assumed_rate_mm_yr"],
        assumed_rate_plate_fixed_mm_yr=rates["assumed_rate_plate_fixed_mm_yr"],
        plate=asked_plate or configured_plate(),
        plate_explicit=bool(asked_plate),
        **inputs,
    )
    if note:
        result.warnings.insert(0, note)
    return result
