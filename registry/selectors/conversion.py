"""Point conversion for the command, the page and the API: one function, settings applied here.

The computation is the pure :func:`registry.geodesy.convert.convert_point`; this module adds what
depends on the office's configuration: the geoid model (``REGISTRY["GEOID_MODEL"]`` in
``REGISTRY["GEOID_DIR"]``, else the labelled EGM96 fallback), the assumed rate for epoch changes
without a velocity (``REGISTRY["ASSUMED_RATE_MM_YR"]``) and the plate of the ITRF2020 plate motion
model applied to such epoch changes in a dynamic frame (``REGISTRY["PLATE"]``; empty: none, the
result then carries a warning that plate motion is not modelled).
"""

from __future__ import annotations

from pathlib import Path

from django.conf import settings

from registry.geodesy.convert import PointConversion, convert_point
from registry.geodesy.heights import GeoidModel, egm96_fallback
from registry.geodesy.projsetup import find_grid

__all__ = ["configured_geoid", "configured_plate", "point_convert"]


def configured_plate() -> str | None:
    """The plate code of ``REGISTRY["PLATE"]`` (upper case), or None when the setting is empty."""
    value = (settings.REGISTRY.get("PLATE") or "").strip().upper()
    return value or None


def configured_geoid() -> tuple[GeoidModel | None, str | None]:
    """The geoid model to use and, if the configured one is missing, a note saying so.

    Order: the office's grid (``GEOID_MODEL`` found in ``GEOID_DIR`` or on PROJ's path), then EGM96
    (approximate, labelled), then None.
    """
    reg = settings.REGISTRY
    geoid_dir = reg.get("GEOID_DIR") or ""
    name = (reg.get("GEOID_MODEL") or "").strip()
    note = None
    if name:
        path = find_grid(name, dirs=[geoid_dir])
        if path:
            label = reg.get("GEOID_NAME") or Path(name).stem
            return GeoidModel(name=label, grid=path, approximate=False), None
        note = f"The office geoid grid '{name}' was not found in {geoid_dir}; falling back to the global model."
    fallback = egm96_fallback(dirs=[geoid_dir])
    if Path(fallback.grid).is_absolute():
        return fallback, note
    return None, note


def point_convert(**inputs) -> PointConversion:
    """Convert one point; ``inputs`` as for :func:`registry.geodesy.convert.convert_point`.

    Access: the page and the API allow the viewer role and above (checked there, before calling);
    the command line runs with the server's own rights. Bad input raises
    ``registry.geodesy.convert.ConversionError`` (with ``code`` and ``field``) and changes nothing.
    """
    geoid, note = configured_geoid()
    result = convert_point(
        geoid=geoid,
        assumed_rate_mm_yr=float(settings.REGISTRY.get("ASSUMED_RATE_MM_YR", 2.0)),
        plate=configured_plate(),
        **inputs,
    )
    if note:
        result.warnings.insert(0, note)
    return result
