"""Writing the registry's marks as CSV or GeoJSON (the formats ``registry.services.imports`` reads).

An export is a read: it carries every mark (ordered by code) and all its currently published positions,
one row (CSV) or feature (GeoJSON) per (mark, published position), ordered by frame; a mark without a
published position takes one row without a position. Each row carries the mark's ``version`` and the
position's ``position_revision``, which ``import_marks --update`` checks. With ``frame_epsg`` only
positions in that frame are written. So an export re-imports into an empty registry to the same marks
and published positions. It is not a backup: history (superseded, withdrawn and proposed positions,
occupations, visits, attachments, the audit trail) stays in the database (``deploy/README.md``).
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
    rows = [export_values(mark, pos, rev) for mark, pos, rev in marks_for_export(frame_epsg=frame_epsg)]
    return write_marks_csv(rows) if fmt == "csv" else write_marks_geojson(rows)
