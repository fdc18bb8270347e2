"""Marks as GeoJSON (RFC 7946: a FeatureCollection of Point features).

One feature per (mark, published position): a mark with positions in several frames takes several
features (its fields repeated), a mark without one takes one feature with a ``null`` geometry.
``properties`` hold the mark's description fields and ``version``, and the position's frame, epoch,
uncertainty, velocity, source and ``position_revision`` (the names of ``registry.io.common``;
README.md, section import-export; the earlier names of renamed properties are read as the new ones for
one more release). The geometry is the published position: ``[lon, lat, h]`` in
degrees and metres, or ``[lon, lat]`` with the ellipsoidal height in the ``h_m`` property.

Coordinates are in the position's own frame (``frame_epsg``), not necessarily WGS 84 as RFC 7946 §4
assumes: a GIS that ignores ``frame_epsg`` will draw the marks within a metre or two of their place,
which is fine for a map but the coordinates must be used with their frame and epoch. Errors name the
feature by its index in ``features`` (0-based, as in ``features[3]``).
"""

from __future__ import annotations

import datetime as dt
import json
import math
from typing import Any

from registry.io.common import (
    MARK_FIELDS,
    POSITION_PROPERTY_FIELDS,
    VERSION_FIELD,
    ParseResult,
    RowError,
    new_column_names,
    validate_row,
)
from registry.jsonlimits import JSONLimitError, loads_checked

MEDIA_TYPE = "application/geo+json"
#: Properties written on export, in order.
PROPERTY_NAMES: tuple[str, ...] = MARK_FIELDS + (VERSION_FIELD,) + POSITION_PROPERTY_FIELDS
#: Properties accepted on import: those, plus ``h_m`` for features with 2D coordinates.
ACCEPTED_PROPERTIES: frozenset[str] = frozenset(PROPERTY_NAMES) | {"h_m"}


def _reject_constant(name: str):
    raise ValueError(f"{name} is not valid JSON")


def parse_marks_geojson(text: str) -> ParseResult:
    """Parse and validate GeoJSON text; every problem is collected, nothing is written anywhere."""
    result = ParseResult(format="geojson")
    if text.startswith("\ufeff"):
        text = text[1:]
    try:
        doc = loads_checked(text, parse_constant=_reject_constant)
    except JSONLimitError as exc:
        result.errors.append(RowError("file", 0, exc.code, exc.message))
        return result
    except (json.JSONDecodeError, ValueError) as exc:
        result.errors.append(RowError("file", 0, "malformed_json", f"not valid JSON: {exc}"))
        return result
    if not isinstance(doc, dict) or doc.get("type") != "FeatureCollection":
        result.errors.append(RowError("file", 0, "not_feature_collection", "expected a GeoJSON FeatureCollection"))
        return result
    features = doc.get("features")
    if not isinstance(features, list):
        result.errors.append(RowError("file", 0, "not_feature_collection", "'features' must be a list"))
        return result

    for i, feature in enumerate(features):
        where = f"features[{i}]"
        raw, errors = _feature_to_row(feature, where, i)
        if errors:
            result.errors.extend(errors)
            continue
        record, errors = validate_row(raw, where=where, index=i)
        if errors:
            result.errors.extend(errors)
        else:
            result.records.append(record)
    return result


def _feature_to_row(feature: Any, where: str, index: int) -> tuple[dict[str, Any], list[RowError]]:
    errors: list[RowError] = []

    def err(code: str, message: str, field: str = "") -> None:
        mark_code = ""
        if isinstance(feature, dict) and isinstance(feature.get("properties"), dict):
            candidate = feature["properties"].get("code")
            mark_code = candidate if isinstance(candidate, str) else ""
        errors.append(RowError(where, index, code, message, field, mark_code))

    if not isinstance(feature, dict) or feature.get("type") != "Feature":
        err("not_a_feature", 'expected an object with "type": "Feature"')
        return {}, errors
    props = feature.get("properties")
    if not isinstance(props, dict):
        err("properties_required", "a feature needs a 'properties' object with at least 'code'")
        return {}, errors
    names, renamed = new_column_names(list(props), where=where, index=index)
    if renamed:
        errors.extend(renamed)
        return {}, errors
    props = dict(zip(names, props.values(), strict=True))  # earlier property names read as the new ones
    unknown = [k for k in props if k not in ACCEPTED_PROPERTIES]
    if unknown:
        err(
            "unknown_property",
            f"unknown propert{'y' if len(unknown) == 1 else 'ies'}: "
            + ", ".join(repr(k[:60]) for k in unknown[:20])
            + (f" and {len(unknown) - 20} more" if len(unknown) > 20 else ""),
        )
    raw: dict[str, Any] = {k: v for k, v in props.items() if k in PROPERTY_NAMES and k != "h_m"}

    geometry = feature.get("geometry")
    position_props = [k for k in POSITION_PROPERTY_FIELDS if props.get(k) not in (None, "")]
    if geometry is None:
        if position_props or props.get("h_m") not in (None, ""):
            err("geometry_required", "position properties are given but the geometry is null", "geometry")
        return raw, errors
    if not isinstance(geometry, dict) or geometry.get("type") != "Point":
        kind = geometry.get("type") if isinstance(geometry, dict) else type(geometry).__name__
        err("not_a_point", f"the geometry must be a Point (or null), got {kind!r}", "geometry")
        return raw, errors
    coords = geometry.get("coordinates")
    if not isinstance(coords, list) or len(coords) not in (2, 3):
        err("bad_coordinates", "Point coordinates must be [lon, lat] or [lon, lat, h]", "geometry")
        return raw, errors
    for value in coords:
        if isinstance(value, bool) or not isinstance(value, int | float) or not math.isfinite(value):
            err("not_a_number", f"coordinates must be numbers, got {value!r}", "geometry")
            return raw, errors
    raw["lon_deg"], raw["lat_deg"] = coords[0], coords[1]
    if len(coords) == 3:
        if props.get("h_m") not in (None, ""):
            err("height_twice", "the height is both the third coordinate and the 'h_m' property", "h_m")
        raw["h_m"] = coords[2]
    else:
        raw["h_m"] = props.get("h_m")
    return raw, errors


def _json_value(value: Any) -> Any:
    """Dates (``suspect_since``) as YYYY-MM-DD text; everything else as it is."""
    return value.isoformat() if isinstance(value, dt.date) else value


def write_marks_geojson(rows: list[dict], *, frame_epsg: int | None = None, frame_name: str = "") -> str:
    """GeoJSON text of export rows (``registry.io.common.export_values``).

    With ``frame_epsg`` (the export: one frame per file) the collection names its frame in a ``frame``
    member (RFC 7946 §6.1 foreign member): ``{"epsg", "name", "note"}``.

    Numbers are JSON numbers written with Python's shortest exact representation, so they read back
    to the same floats. Mark fields always appear; position properties are null without a position.
    One feature per line.
    """
    features = []
    for values in rows:
        has_position = values.get("frame_epsg") is not None
        geometry = (
            {"type": "Point", "coordinates": [values["lon_deg"], values["lat_deg"], values["h_m"]]}
            if has_position
            else None
        )
        properties = {name: _json_value(values.get(name)) for name in PROPERTY_NAMES}
        features.append({"type": "Feature", "geometry": geometry, "properties": properties})
    # One feature per line: readable, and a change to one mark is a one-line difference.
    lines = [json.dumps(f, ensure_ascii=False, allow_nan=False) for f in features]
    body = ",\n".join(lines)
    head = '{"type": "FeatureCollection", '
    if frame_epsg is not None:
        frame = {
            "epsg": int(frame_epsg),
            "name": frame_name or f"EPSG:{frame_epsg}",
            "note": (
                f"Coordinates are in {frame_name or 'this frame'} (EPSG:{frame_epsg}) at each feature's epoch_yr, "
                "not WGS 84; one frame per file."
            ),
        }
        head += '"frame": ' + json.dumps(frame, ensure_ascii=False) + ", "
    return head + '"features": [\n' + body + ("\n" if lines else "") + "]}\n"
