"""Reads of custom grids, and the one place where a grid choice (EPSG code, "utm" or a custom grid's
code) is turned into something the geodesy functions take.

Accepted wherever a grid is asked for (the conversion command, page and API; a job's deliverable
grid): an EPSG code of a projected CRS (``6341``, ``EPSG:6341``), ``utm`` (the zone chosen from the
point), or the code of one of the office's custom grids (it starts with a letter, so it is never
mistaken for an EPSG code).
"""

from __future__ import annotations

from registry.geodesy.customgrid import CustomGridDefinition, CustomGridError, build_custom_grid
from registry.geodesy.grid import GridCRS
from registry.models import CustomGrid

__all__ = ["UnknownGrid", "custom_grids", "definition_of", "grid_crs_of", "resolve_grid_choice"]


class UnknownGrid(LookupError):
    """No custom grid with that code."""

    code = "unknown_grid"


def custom_grids():
    """All custom grids, by code."""
    return CustomGrid.objects.select_related("created_by").order_by("code")


def definition_of(grid: CustomGrid) -> CustomGridDefinition:
    """The pure definition of a stored (or about to be stored) grid."""
    return CustomGridDefinition(
        code=grid.code,
        name=grid.name,
        frame_epsg=grid.frame_epsg,
        method=grid.method,
        area_west_deg=grid.area_west_deg,
        area_south_deg=grid.area_south_deg,
        area_east_deg=grid.area_east_deg,
        area_north_deg=grid.area_north_deg,
        unit=grid.unit,
        lat0_deg=grid.lat0_deg,
        lon0_deg=grid.lon0_deg,
        k0=grid.k0,
        false_easting=grid.false_easting,
        false_northing=grid.false_northing,
        utm_zone=grid.utm_zone,
        utm_south=grid.utm_south,
        anchor_lat_deg=grid.anchor_lat_deg,
        anchor_lon_deg=grid.anchor_lon_deg,
        scale=grid.scale,
    )


def grid_crs_of(grid: CustomGrid) -> GridCRS:
    """The stored grid built for use (cached by its definition)."""
    return build_custom_grid(definition_of(grid))


def resolve_grid_choice(value):
    """``"utm"``, an EPSG code (returned as given) or a custom grid's :class:`GridCRS`.

    Raises
    ------
    UnknownGrid
        ``value`` looks like a custom grid's code but no such grid is stored.
    """
    if value is None or isinstance(value, GridCRS | int):
        return value
    text = str(value).strip()
    bare = text.upper().removeprefix("EPSG:")
    if text.lower() == "utm" or bare.isdigit() or not text:
        return text
    grid = CustomGrid.objects.filter(code=text.upper()).first()
    if grid is None:
        raise UnknownGrid(
            f"No grid '{text}': give an EPSG code of a projected CRS, 'utm', or the code of one of the office's "
            "custom grids (see the list of custom grids)."
        )
    try:
        return grid_crs_of(grid)
    except CustomGridError as exc:  # a stored grid that PROJ no longer builds (a changed PROJ database)
        raise UnknownGrid(f"The custom grid {grid.code} can no longer be built: {exc}") from exc
