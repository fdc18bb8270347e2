"""Writing the registry's marks as CSV, GeoJSON (the formats ``registry.services.imports`` reads) or GeoPackage.

An export is a read: it carries every mark (ordered by code) and all its currently published positions,
one row (CSV) or feature (GeoJSON) per (mark, published position), ordered by frame; a mark without a
published position takes one row without a position. Each row carries the mark's ``version`` and the
position's ``position_revision``, which ``import_marks --update`` checks. With ``frame_epsg`` only
positions in that frame are written. A GeoJSON file holds one frame only (RFC 7946 readers take every
coordinate as WGS 84, so two frames in one file would be drawn as one, metres apart): ``frame_epsg``, or
the office's export frame (``REGISTRY_EXPORT_FRAME``, default ITRF2014, EPSG:7912), named in the file's
``frame`` member. A GeoPackage holds every frame, one layer per frame with its own EPSG CRS
(``registry.io.marks_geopackage``). So a CSV export re-imports into an empty registry to the same marks
and published positions. It is not a backup: history (superseded, withdrawn and proposed positions,
occupations, visits, attachments, the audit trail) stays in the database (``deploy/README.md``).
"""

from __future__ import annotations

from registry.io.common import export_values, marks_for_export
from registry.io.marks_csv import MEDIA_TYPE as CSV_MEDIA_TYPE
from registry.io.marks_csv import write_marks_csv
from registry.io.marks_geojson import MEDIA_TYPE as GEOJSON_MEDIA_TYPE
from registry.io.marks_geojson import write_marks_geojson
from registry.io.marks_geopackage import MEDIA_TYPE as GPKG_MEDIA_TYPE
from registry.io.marks_geopackage import write_marks_geopackage

EXPORT_FORMATS = {
    "csv": (CSV_MEDIA_TYPE, "csv"),
    "geojson": (GEOJSON_MEDIA_TYPE, "geojson"),
    "gpkg": (GPKG_MEDIA_TYPE, "gpkg"),
}
#: Formats whose export is text (the others are bytes).
TEXT_FORMATS = ("csv", "geojson")


def default_export_frame() -> int:
    """The frame of a GeoJSON export when none is asked for (setting ``REGISTRY_EXPORT_FRAME``)."""
    from django.conf import settings

    return int(settings.REGISTRY.get("EXPORT_FRAME") or 7912)


def _frame_name(epsg: int) -> str:
    from registry.formatting import frame_name

    return frame_name(epsg) or f"EPSG:{epsg}"


def export_marks_text(*, fmt: str, frame_epsg: int | None = None) -> str:
    """The export text in ``fmt`` (``csv`` or ``geojson``); ``frame_epsg`` picks the positions' frame.

    GeoJSON holds one frame: ``frame_epsg`` or :func:`default_export_frame`.
    """
    if fmt not in TEXT_FORMATS:
        raise ValueError(f"unknown text export format {fmt!r}; use csv or geojson")
    if fmt == "geojson" and frame_epsg is None:
        frame_epsg = default_export_frame()
    rows = [export_values(mark, pos, rev) for mark, pos, rev in marks_for_export(frame_epsg=frame_epsg)]
    if fmt == "csv":
        return write_marks_csv(rows)
    return write_marks_geojson(rows, frame_epsg=frame_epsg, frame_name=_frame_name(frame_epsg))


def export_marks_bytes(*, fmt: str, frame_epsg: int | None = None) -> bytes:
    """The export in ``fmt`` as bytes (text formats UTF-8); ``gpkg``: one layer per frame."""
    if fmt in TEXT_FORMATS:
        return export_marks_text(fmt=fmt, frame_epsg=frame_epsg).encode("utf-8")
    if fmt != "gpkg":
        raise ValueError(f"unknown export format {fmt!r}; use csv, geojson or gpkg")
    rows = [export_values(mark, pos, rev) for mark, pos, rev in marks_for_export(frame_epsg=frame_epsg)]
    frames = {int(r["frame_epsg"]) for r in rows if r.get("frame_epsg") is not None}
    return write_marks_geopackage(rows, frame_names={epsg: _frame_name(epsg) for epsg in frames})
