"""The job's deliverable grid at its site: which grid it is, and whether the site lies in its area of use.

A grid still computes outside its area of use, but its distortion grows fast away from its central meridian
and it is not the grid agreed for that place (``geodesy.grid.area_of_use_warnings``). A crew that delivers
grid coordinates must hear that before the job, not find it in a spreadsheet column afterwards, so the
screening states it with its other warnings (page, API, text report, CSV).
"""

from __future__ import annotations

import numpy as np
import pyproj

from registry.geodesy import grid as grid_geo
from registry.geodesy.frames import crs_label
from registry.geodesy.site import Site


def site_points_deg(site: Site) -> tuple[np.ndarray, np.ndarray]:
    """Latitudes and longitudes of the site's reference point and its outline's corners (each once)."""
    ring = np.asarray(site.rings_lonlat_deg[0], dtype=float)
    if site.kind == "polygon" and len(ring) > 1:
        ring = ring[:-1]  # the closing vertex repeats the first
    lat = np.concatenate([[site.ref_lat_deg], ring[:, 1]]) if site.kind == "polygon" else ring[:, 1]
    lon = np.concatenate([[site.ref_lon_deg], ring[:, 0]]) if site.kind == "polygon" else ring[:, 0]
    return lat, lon


def deliverable_grid_at_site(site: Site, *, frame_epsg: int, grid) -> tuple[str, list[str]]:
    """(the grid's name for people, warnings) for the job's ``grid`` (EPSG code, custom grid or ``"utm"``)."""
    lat, lon = site_points_deg(site)
    try:
        g = grid_geo.to_grid(lat, lon, frame_epsg=frame_epsg, grid=grid)
    except (grid_geo.GridError, pyproj.exceptions.CRSError, pyproj.exceptions.ProjError) as exc:
        return "", [f"Deliverable grid: it cannot be computed at the site ({exc})."]
    label = g.grid.name if g.grid.epsg is None else crs_label(g.grid.name, g.grid.epsg)
    if isinstance(grid, str) and grid.lower() == "utm":
        label += " (the site's zone: the job names no grid)"
    if not g.warnings:
        return label, []
    n_out = int(np.count_nonzero(grid_geo.outside_area(lat, lon, grid=g.grid)))
    if site.kind == "point":
        who = "The site is"
    elif n_out == len(lat):
        who = "The whole site is"
    else:
        who = f"Part of the site ({n_out} of its {len(lat)} corner and centre points) is"
    return label, [
        "Deliverable grid: "
        + grid_geo.area_of_use_warnings(lat, lon, grid=g.grid, scale_factor=g.scale_factor, who=who)[0]
    ]
