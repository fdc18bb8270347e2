"""Writing the registry's marks as CSV or GeoJSON (the formats ``registry.services.imports`` reads).

An export is a read: it carries every mark (ordered by code) with at most one published position each —
the one in the requested frame, or else the mark's most recently published one — so it re-imports
into an empty registry to the same marks and published positions. It is not a backup: history
(superseded positions, occupations, visits, audit trail) stays in the database.
"""

from __future__ import annotations

from registry.io.common import export_values, marks_for_export
from registry.io.marks_csv import MEDIA_TYPE as CSV_MEDIA_TYPE
from registry.io.marks_csv import write_marks_csv
from registry.io.marks_geojson import MEDIA_TYPE as GEOJSON_MEDIA_TYPE
from registry.io.marks_geojson import write_marks_geojson

EXPORT_FORMATS = {"csv": (CSV_MEDIA_TYPE, "csv"), "geojson": (GEOJSON_MEDIA_TYPE, "geojson")}


def export_marks_text(*, fmt: str, frame_epsg: int | None = None) -> str:
    """The export text in ``fmt`` (``csv`` or ``geojson``); ``frame_epsg`` picks the positions' frame."""
    if fmt not in EXPORT_FORMATS:
        raise ValueError(f"unknown export format {fmt!r}; use csv or geojson")
    rows = [export_values(mark, position) for mark, position in marks_for_export(frame_epsg=frame_epsg)]
    return write_marks_csv(rows) if fmt == "csv" else write_marks_geojson(rows)
