"""The field export of a screening: the chosen bases and the check marks, for a field controller.

What the export contains is decided here, once, for the CSV and the GeoJSON file alike: one row per
chosen base and per suggested check mark, in the job's frame at its epoch. The web layer only writes
the rows out (with its spreadsheet guard for CSV).
"""

from __future__ import annotations

from typing import Any

from registry.services.screening.result import ScreeningResult

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
    "horizontal_95_mm",
    "vertical_95_mm",
    "note",
)


def export_rows(result: ScreeningResult) -> list[dict]:
    """One row per chosen base and per suggested check mark, in the job's frame at its epoch."""
    s = result.settings
    label = result.frame_label
    rows = []
    for c in result.chosen:
        rows.append(
            {
                "role": "base",
                "code": c.mark.code,
                "name": c.mark.name,
                "lat_deg": f"{c.lat_deg:.9f}",
                "lon_deg": f"{c.lon_deg:.9f}",
                "h_m": f"{c.h_m:.3f}",
                "frame_epsg": s.frame_epsg,
                "frame": label,
                "epoch_yr": f"{s.epoch_yr:.3f}",
                "horizontal_95_mm": f"{c.h95_mm:.1f}",
                "vertical_95_mm": f"{c.v95_mm:.1f}",
                "note": "worst rover 95 % figures over the site from this base; ellipsoidal height",
            }
        )
    for cm in result.check_marks:
        c = cm.candidate
        first = cm.allowances[0] if cm.allowances else None
        rows.append(
            {
                "role": "check",
                "code": c.mark.code,
                "name": c.mark.name,
                "lat_deg": f"{c.lat_deg:.9f}",
                "lon_deg": f"{c.lon_deg:.9f}",
                "h_m": f"{c.h_m:.3f}",
                "frame_epsg": s.frame_epsg,
                "frame": label,
                "epoch_yr": f"{s.epoch_yr:.3f}",
                "horizontal_95_mm": "" if first is None else f"{first['horizontal_95_mm']:.1f}",
                "vertical_95_mm": "" if first is None else f"{first['vertical_95_mm']:.1f}",
                "note": ""
                if first is None
                else f"largest check-shot discrepancy consistent at 95 % from base {first['base']}",
            }
        )
    return rows


def export_geojson(result: ScreeningResult, *, name: str) -> dict[str, Any]:
    """The export as a GeoJSON FeatureCollection (points in the job's frame, not WGS 84; said in the file)."""
    features = []
    for row in export_rows(result):
        props = {k: v for k, v in row.items() if k not in ("lat_deg", "lon_deg", "h_m")}
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
    return {
        "type": "FeatureCollection",
        "name": f"{name} bases and check marks",
        "coordinates_note": (
            f"Longitude, latitude (degrees) and ellipsoidal height (m) in {result.frame_label} at "
            f"epoch {result.settings.epoch_yr:.3f}, not WGS 84. Verify control in the field before use."
        ),
        "features": features,
    }
