"""Marks as a GeoPackage (OGC 12-128r19): one point layer per frame, each with that frame's EPSG CRS.

GeoJSON is WGS 84 by definition (RFC 7946), so a GeoJSON export holds one frame per file; a GeoPackage
can hold several frames side by side without a GIS mixing them up, because each layer carries its own
coordinate reference system. Written through pyogrio (GDAL's vector drivers, wheels bring GDAL).

Layer ``marks_epsg<code>``: one Point Z feature per mark with a published position in that frame,
geometry (longitude, latitude, ellipsoidal height) in degrees and metres, attributes as the CSV
columns (README "Import and export"), the layer's description naming the frame. Marks without a
published position have no point and are not in the GeoPackage (they are in the CSV export).
"""

from __future__ import annotations

import os
import struct
import tempfile
from typing import Any

import numpy as np

from registry.io.common import CSV_COLUMNS, INTEGER_FIELDS

MEDIA_TYPE = "application/geopackage+sqlite3"
#: Attribute columns (the coordinates are the geometry).
ATTRIBUTE_COLUMNS: tuple[str, ...] = tuple(c for c in CSV_COLUMNS if c not in ("lat_deg", "lon_deg", "h_m"))
_TEXT_COLUMNS = {
    "code",
    "name",
    "access_directions",
    "monument",
    "monument_detail",
    "marking",
    "stability",
    "sky_view",
    "keeper",
    "status",
    "suspect_since",
    "suspect_reason",
    "notes",
    "source",
}


def layer_name(frame_epsg: int) -> str:
    return f"marks_epsg{int(frame_epsg)}"


def _point_z_wkb(lon_deg: float, lat_deg: float, h_m: float) -> bytes:
    """ISO WKB of a Point Z (type 1001, little-endian), x = longitude, y = latitude."""
    return struct.pack("<BIddd", 1, 1001, float(lon_deg), float(lat_deg), float(h_m))


def _column(name: str, values: list[Any]) -> np.ndarray:
    if name in _TEXT_COLUMNS:
        return np.array(["" if v is None else str(v) for v in values], dtype=object)
    if name in INTEGER_FIELDS:
        return np.array([-1 if v is None else int(v) for v in values], dtype=np.int64)
    return np.array([np.nan if v is None else float(v) for v in values], dtype=np.float64)


def write_marks_geopackage(rows: list[dict], *, frame_names: dict[int, str] | None = None) -> bytes:
    """The bytes of a GeoPackage of export rows (``registry.io.common.export_values``), one layer per frame.

    Rows without a position are left out. An export with no position at all is an empty GeoPackage
    with no layer (GDAL still writes a valid file).
    """
    import pyogrio.raw

    by_frame: dict[int, list[dict]] = {}
    for values in rows:
        if values.get("frame_epsg") is not None:
            by_frame.setdefault(int(values["frame_epsg"]), []).append(values)
    handle, path = tempfile.mkstemp(suffix=".gpkg")
    os.close(handle)
    os.unlink(path)  # GDAL creates the file itself
    try:
        if not by_frame:
            # nothing published: one empty layer, so that the file is still a valid GeoPackage
            pyogrio.raw.write(
                path,
                np.array([], dtype=object),
                [],
                [],
                layer="marks_empty",
                driver="GPKG",
                geometry_type="Point Z",
                crs="EPSG:4979",
                dataset_options={"VERSION": "1.2"},
            )
        for i, (epsg, frame_rows) in enumerate(sorted(by_frame.items())):
            geometry = np.array([_point_z_wkb(v["lon_deg"], v["lat_deg"], v["h_m"]) for v in frame_rows], dtype=object)
            fields = list(ATTRIBUTE_COLUMNS)
            data = [_column(name, [v.get(name) for v in frame_rows]) for name in fields]
            name = (frame_names or {}).get(epsg, f"EPSG:{epsg}")
            pyogrio.raw.write(
                path,
                geometry,
                data,
                fields,
                layer=layer_name(epsg),
                driver="GPKG",
                geometry_type="Point Z",
                crs=f"EPSG:{epsg}",
                append=i > 0,
                # GeoPackage 1.2: read without warnings by the GDAL of current Linux distributions too
                dataset_options={"VERSION": "1.2"} if i == 0 else None,
                layer_options={
                    "IDENTIFIER": f"Marks, {name} (EPSG:{epsg})",
                    "DESCRIPTION": (
                        f"Published positions in {name} (EPSG:{epsg}): longitude, latitude, ellipsoidal height "
                        "at each position's coordinate epoch (epoch_yr). Use them only in this frame and at that epoch."
                    ),
                },
            )
        with open(path, "rb") as f:
            return f.read()
    finally:
        for suffix in ("", "-wal", "-shm", "-journal"):
            try:
                os.unlink(path + suffix)
            except FileNotFoundError:
                pass
