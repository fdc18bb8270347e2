"""The field export of a screening: the chosen bases and the check marks, for a field controller.

What the export contains is decided here, once, for the CSV and the GeoJSON file alike: one row per
chosen base and per suggested check mark, in the job's frame at its epoch, with

- the job's grid coordinates (EPSG grid, the office's custom grid, or the UTM zone of the point),
  the point scale factor and the combined factor (scale × elevation factor R/(R + h), h ellipsoidal;
  :mod:`registry.geodesy.grid`);
- the orthometric height to deliver with its source: a current levelled height record first, else a
  geoid-derived one (:func:`registry.selectors.screening.preferred_heights`), else none;
- how the RTK specification was read (the job's setting, in words);
- for each base when more than one is chosen, the part of the site it serves: the outline of the site
  cells where it is the best of the chosen bases and within tolerance (as WKT in the CSV, as a
  MultiPolygon feature in GeoJSON; longitude/latitude in the job's frame).

The web layer only writes the rows out (with its spreadsheet guard for CSV).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from registry.geodesy import grid as grid_geo
from registry.geodesy import site as site_geo
from registry.geodesy.frames import crs_label
from registry.selectors.screening import preferred_heights
from registry.services.screening.result import Candidate, ScreeningResult
from registry.services.screening.statement import error_model_words

EXPORT_COLUMNS = (
    "role",
    "code",
    "name",
    "lat_deg",
    "lon_deg",
    "h_m",
    "frame_epsg",
    "frame",
    "epoch_yr",
    "grid",
    "easting_m",
    "northing_m",
    "scale_factor",
    "combined_factor",
    "orthometric_h_m",
    "height_datum_epsg",
    "height_source",
    "horizontal_95_mm",
    "vertical_95_mm",
    "rtk_model",
    "service_area_wkt",
    "note",
)


def service_area_polygons(result: ScreeningResult) -> dict[str, list[list[np.ndarray]]]:
    """Per chosen base (code), its service area as polygons with holes, rings of (lon, lat) degrees.

    Only for polygon sites with more than one chosen base (a single base serves the whole site).
    """
    if result.assignment is None or len(result.chosen) < 2 or result.grid.spacing_m <= 0:
        return {}
    g = result.grid
    out = {}
    for i, c in enumerate(result.chosen):
        mask = (result.assignment == i) & g.is_cell
        polys = []
        for poly in site_geo.cells_outline_m(g.e_m[mask], g.n_m[mask], g.spacing_m):
            rings = []
            for ring in poly:
                lat, lon = result.plane.to_geodetic_deg(ring[:, 0], ring[:, 1])
                rings.append(np.column_stack([lon, lat]))
            polys.append(rings)
        out[c.mark.code] = polys
    return out


def _wkt(polys: list[list[np.ndarray]]) -> str:
    if not polys:
        return ""
    body = ", ".join(
        "(" + ", ".join("(" + ", ".join(f"{x:.9f} {y:.9f}" for x, y in ring) + ")" for ring in poly) + ")"
        for poly in polys
    )
    return f"MULTIPOLYGON ({body})"


def _grid_columns(result: ScreeningResult, c: Candidate) -> dict[str, str]:
    s = result.settings
    try:
        g = grid_geo.to_grid(c.lat_deg, c.lon_deg, frame_epsg=s.frame_epsg, grid=s.grid)
    except grid_geo.GridError:
        return {"grid": "", "easting_m": "", "northing_m": "", "scale_factor": "", "combined_factor": ""}
    k = float(g.scale_factor)
    ef = float(grid_geo.elevation_factor(c.h_m, lat_deg=c.lat_deg))
    return {
        "grid": g.grid.name if g.grid.epsg is None else crs_label(g.grid.name, g.grid.epsg),
        "easting_m": f"{float(g.easting_m):.3f}",
        "northing_m": f"{float(g.northing_m):.3f}",
        "scale_factor": f"{k:.8f}",
        "combined_factor": f"{float(grid_geo.combined_factor(k, ef)):.8f}",
    }


def _height_columns(height) -> dict[str, str]:
    if height is None:
        return {"orthometric_h_m": "", "height_datum_epsg": "", "height_source": "no orthometric height on record"}
    if height.method == "levelled":
        source = "levelled"
    else:
        source = f"ellipsoidal height minus geoid model N ({height.geoid_model})"
    if height.source:
        source += f"; {height.source}"
    return {
        "orthometric_h_m": f"{height.height_m:.3f}",
        "height_datum_epsg": str(height.datum_epsg),
        "height_source": source,
    }


def export_rows(result: ScreeningResult) -> list[dict]:
    """One row per chosen base and per suggested check mark, in the job's frame at its epoch."""
    s = result.settings
    label = result.frame_label
    model_text = error_model_words(s)
    areas = service_area_polygons(result)
    marks = [c.mark.pk for c in result.chosen] + [cm.candidate.mark.pk for cm in result.check_marks]
    heights = preferred_heights(marks)
    rows = []

    def common(c: Candidate, role: str) -> dict[str, Any]:
        return {
            "role": role,
            "code": c.mark.code,
            "name": c.mark.name,
            "lat_deg": f"{c.lat_deg:.9f}",
            "lon_deg": f"{c.lon_deg:.9f}",
            "h_m": f"{c.h_m:.3f}",
            "frame_epsg": s.frame_epsg,
            "frame": label,
            "epoch_yr": f"{s.epoch_yr:.3f}",
            **_grid_columns(result, c),
            **_height_columns(heights.get(c.mark.pk)),
            "rtk_model": model_text,
        }

    for c in result.chosen:
        rows.append(
            {
                **common(c, "base"),
                "horizontal_95_mm": f"{c.h95_mm:.1f}",
                "vertical_95_mm": f"{c.v95_mm:.1f}",
                "service_area_wkt": _wkt(areas.get(c.mark.code, [])),
                "note": "worst rover 95 % figures over the site from this base; h_m is the ellipsoidal height"
                + ("; serves the part of the site outlined in service_area_wkt" if c.mark.code in areas else ""),
            }
        )
    for cm in result.check_marks:
        c = cm.candidate
        first = cm.allowances[0] if cm.allowances else None
        rows.append(
            {
                **common(c, "check"),
                "horizontal_95_mm": "" if first is None else f"{first['horizontal_95_mm']:.1f}",
                "vertical_95_mm": "" if first is None else f"{first['vertical_95_mm']:.1f}",
                "service_area_wkt": "",
                "note": ""
                if first is None
                else f"largest check-shot discrepancy consistent at 95 % from base {first['base']}",
            }
        )
    return rows


def export_geojson(result: ScreeningResult, *, name: str) -> dict[str, Any]:
    """The export as a GeoJSON FeatureCollection (in the job's frame, not WGS 84; said in the file).

    Points for the bases and check marks; one MultiPolygon per base's service area when several bases share
    the site.
    """
    features = []
    for row in export_rows(result):
        props = {k: v for k, v in row.items() if k not in ("lat_deg", "lon_deg", "h_m", "service_area_wkt")}
        features.append(
            {
                "type": "Feature",
                "geometry": {
                    "type": "Point",
                    "coordinates": [float(row["lon_deg"]), float(row["lat_deg"]), float(row["h_m"])],
                },
                "properties": props,
            }
        )
    for code, polys in service_area_polygons(result).items():
        features.append(
            {
                "type": "Feature",
                "geometry": {
                    "type": "MultiPolygon",
                    "coordinates": [
                        [[[round(float(x), 9), round(float(y), 9)] for x, y in ring] for ring in poly] for poly in polys
                    ],
                },
                "properties": {"role": "service area", "code": code, "note": f"part of the site served from {code}"},
            }
        )
    return {
        "type": "FeatureCollection",
        "name": f"{name} bases and check marks",
        "coordinates_note": (
            f"Longitude, latitude (degrees) and ellipsoidal height (m) in {result.frame_label} at "
            f"epoch {result.settings.epoch_yr:.3f}, not WGS 84. Verify control in the field before use."
        ),
        "features": features,
    }
