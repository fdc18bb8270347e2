"""GeoJSON output of marks (RFC 7946).

A FeatureCollection of Point features, coordinates in [longitude, latitude] order
(RFC 7946 §3.1.1), decimal degrees to 9 places. RFC 7946 assumes WGS 84; our
coordinates are the mark's search location, taken from its latest published position
in whatever frame that position is in (ITRF2014, NAD83(2011)...). Those frames differ
from one another by up to a few metres, so every feature carries ``frame_epsg`` and
``epoch_yr`` in its properties and the collection says so: use GeoJSON for maps and
search, and a position (with its frame and epoch) for survey work. A mark without a
published position has ``"geometry": null`` (RFC 7946 §3.2).

The paging information of the list (``count``, ``next``, ``previous``) rides along as
foreign members of the FeatureCollection (RFC 7946 §6.1).
"""

from __future__ import annotations

from typing import Any

from rest_framework.renderers import JSONRenderer

from registry.api.serializers import EPOCH_DECIMALS, LATLON_DECIMALS
from registry.formatting import frame_name
from registry.models import Mark
from registry.services.usability import assess, mark_usability

GEOJSON_MEDIA_TYPE = "application/geo+json"
COORDINATE_NOTE = (
    "Coordinates are the marks' search locations (latest published position, in the frame and at the "
    "epoch named in each feature), not WGS 84 survey coordinates. For map display and search only; "
    "verify control in the field before use."
)


class GeoJSONRenderer(JSONRenderer):
    """Renders the view's data as ``application/geo+json`` (``?format=geojson``)."""

    media_type = GEOJSON_MEDIA_TYPE
    format = "geojson"


def mark_feature(mark: Mark) -> dict[str, Any]:
    """One RFC 7946 Feature for ``mark`` (``src_frame_epsg``/``src_epoch_yr`` annotations used when present)."""
    if mark.search_lat_deg is not None and mark.search_lon_deg is not None:
        geometry: dict[str, Any] | None = {
            "type": "Point",
            "coordinates": [round(mark.search_lon_deg, LATLON_DECIMALS), round(mark.search_lat_deg, LATLON_DECIMALS)],
        }
    else:
        geometry = None
    # the one rule of services.usability; the list's rows carry their latest finding (selectors.marks)
    if hasattr(mark, "last_visit_finding"):
        usability = assess(mark.status, mark.last_visit_finding, suspect_reason=mark.suspect_reason)
    else:
        usability = mark_usability(mark)
    frame_epsg = getattr(mark, "src_frame_epsg", None)
    epoch_yr = getattr(mark, "src_epoch_yr", None)
    return {
        "type": "Feature",
        "id": mark.code,
        "geometry": geometry,
        "properties": {
            "code": mark.code,
            "name": mark.name,
            "status": mark.status,
            "monument": mark.monument,
            "stability": mark.stability,
            "sky_view": mark.sky_view,
            "frame_epsg": frame_epsg if geometry else None,
            "frame_name": frame_name(frame_epsg) if geometry else None,
            "epoch_yr": round(epoch_yr, EPOCH_DECIMALS) if geometry and epoch_yr is not None else None,
            "usable": usability.usable,
            "usability_state": usability.state,
            "usability_reason": usability.reason,
            "version": mark.version,
        },
    }


def feature_collection(marks, *, paging: dict[str, Any] | None = None) -> dict[str, Any]:
    """An RFC 7946 FeatureCollection of ``marks``, with ``paging`` as foreign members."""
    collection: dict[str, Any] = {
        "type": "FeatureCollection",
        "features": [mark_feature(m) for m in marks],
        "coordinate_note": COORDINATE_NOTE,
    }
    if paging:
        collection.update(paging)
    return collection
