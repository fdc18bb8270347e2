"""A job site read from a file: GeoJSON, KML or GPX, turned into one GeoJSON Point or Polygon.

Pure (no Django): the job form calls :func:`site_from_file` and hands the result to the jobs service, which
validates it like a pasted site (:func:`registry.geodesy.site.parse_site_geojson`).

* GeoJSON (RFC 7946): a geometry, a Feature or a FeatureCollection holding exactly one Point or Polygon.
* KML (OGC 07-147r2): the one ``Point`` or ``Polygon`` (outer boundary) of the file; coordinates are
  ``lon,lat[,alt]`` tuples separated by white space.
* GPX 1.1 (topografix.com/GPX/1/1): a track or route of three or more points is read as the site's outline
  (closed if it is not); a single waypoint (or a one-point track) as a site point. ``ele`` is kept as the
  third coordinate only when every point has it.

KML and GPX are parsed with the standard library's ``xml.etree``; as defusedxml is not installed, any file
that declares a DOCTYPE or an entity is refused before parsing (the entity-expansion and external-entity
attacks need one), and files are limited to :data:`MAX_SITE_FILE_BYTES`.

Heights in KML and GPX files are whatever the file says (GPX ``ele`` is commonly above the geoid, KML
altitude relative to the ground or the sea); they are dropped unless the caller asks to keep them, since a
job's site heights are ellipsoidal in its frame. A GeoJSON file's third coordinate is kept, as when pasted.
"""

from __future__ import annotations

import json
import re
import xml.etree.ElementTree as ET

#: Largest site file accepted (bytes).
MAX_SITE_FILE_BYTES = 2_000_000


class SiteFileError(ValueError):
    """A site file that cannot be read; ``str(error)`` is a message for the user, ``code`` a short code."""

    def __init__(self, message: str, code: str):
        super().__init__(message)
        self.code = code


def site_from_file(name: str, data: bytes, *, keep_heights: bool = False) -> dict:
    """The site in ``data`` (a file called ``name``) as a GeoJSON Point or Polygon geometry.

    The kind is chosen by the file name's ending (``.geojson``/``.json``, ``.kml``, ``.gpx``) and, failing
    that, by the content.

    >>> site_from_file("s.gpx", b'<gpx xmlns="http://www.topografix.com/GPX/1/1"><wpt lat="45.5" lon="-110.25"/></gpx>')
    {'type': 'Point', 'coordinates': [-110.25, 45.5]}

    Raises
    ------
    SiteFileError
        ``too_large``, ``empty``, ``unknown_kind``, ``not_utf8``, ``unsafe_xml``, ``bad_xml``, ``bad_json``,
        ``no_site``, ``several_sites``, ``bad_coordinates``, ``too_few_points``.
    """
    if len(data) > MAX_SITE_FILE_BYTES:
        raise SiteFileError(
            f"The file is larger than {MAX_SITE_FILE_BYTES // 1_000_000} MB; a site outline needs far less.",
            "too_large",
        )
    if not data.strip():
        raise SiteFileError("The file is empty.", "empty")
    lower = name.lower()
    head = data.lstrip()[:200].lower()
    if lower.endswith((".geojson", ".json")) or head.startswith(b"{"):
        return _from_geojson(data)  # a third coordinate is the ellipsoidal height, as when pasted
    elif lower.endswith(".kml") or b"<kml" in head:
        geometry = _from_kml(_parse_xml(data))
    elif lower.endswith(".gpx") or b"<gpx" in head:
        geometry = _from_gpx(_parse_xml(data))
    else:
        raise SiteFileError("Give the site as a GeoJSON (.geojson), KML (.kml) or GPX (.gpx) file.", "unknown_kind")
    if not keep_heights:
        geometry = _drop_heights(geometry)
    return geometry


# ----------------------------------------------------------------------------- GeoJSON


def _from_geojson(data: bytes) -> dict:
    try:
        doc = json.loads(data.decode("utf-8-sig"))
    except UnicodeDecodeError:
        raise SiteFileError("The file is not UTF-8 text.", "not_utf8") from None
    except ValueError as exc:
        raise SiteFileError(
            f"The file is not valid GeoJSON (line {getattr(exc, 'lineno', '?')}).", "bad_json"
        ) from None
    geometries = []
    if not isinstance(doc, dict):
        raise SiteFileError("The file is not a GeoJSON object.", "bad_json")
    kind = doc.get("type")
    if kind == "FeatureCollection":
        for feature in doc.get("features") or []:
            if isinstance(feature, dict) and isinstance(feature.get("geometry"), dict):
                geometries.append(feature["geometry"])
    elif kind == "Feature":
        if isinstance(doc.get("geometry"), dict):
            geometries.append(doc["geometry"])
    else:
        geometries.append(doc)
    sites = [g for g in geometries if g.get("type") in ("Point", "Polygon")]
    if not sites:
        raise SiteFileError("The file holds no Point or Polygon to use as the site.", "no_site")
    if len(sites) > 1:
        raise SiteFileError(
            f"The file holds {len(sites)} points or polygons; keep only the site in it.", "several_sites"
        )
    return {"type": sites[0]["type"], "coordinates": sites[0].get("coordinates")}


# ----------------------------------------------------------------------------- XML (KML, GPX)

_UNSAFE = re.compile(rb"<!\s*(DOCTYPE|ENTITY)", re.IGNORECASE)


def _parse_xml(data: bytes) -> ET.Element:
    if _UNSAFE.search(data):
        raise SiteFileError(
            "The file declares a document type or entities, which are not accepted; export it again as plain "
            "KML or GPX.",
            "unsafe_xml",
        )
    try:
        return ET.fromstring(data)
    except ET.ParseError as exc:
        line = exc.position[0] if getattr(exc, "position", None) else "?"
        raise SiteFileError(f"The file is not well-formed XML (line {line}).", "bad_xml") from None


def _local(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


def _find_all(root: ET.Element, name: str) -> list[ET.Element]:
    return [e for e in root.iter() if _local(e.tag) == name]


def _number(text, what: str) -> float:
    try:
        return float(text)
    except (TypeError, ValueError):
        raise SiteFileError(f"A {what} in the file is not a number: {str(text)[:40]!r}.", "bad_coordinates") from None


def _kml_coordinates(element: ET.Element) -> list[list[float]]:
    coords = _find_all(element, "coordinates")
    text = (coords[0].text or "") if coords else ""
    if not text.strip():
        raise SiteFileError("A KML geometry in the file has no coordinates.", "bad_coordinates")
    out = []
    for token in text.split():
        parts = token.split(",")
        if len(parts) not in (2, 3):
            raise SiteFileError(
                f"KML coordinates are longitude,latitude[,altitude]; found {token[:40]!r}.", "bad_coordinates"
            )
        out.append([_number(p, "coordinate") for p in parts])
    return out


def _from_kml(root: ET.Element) -> dict:
    points = _find_all(root, "Point")
    polygons = _find_all(root, "Polygon")
    if len(points) + len(polygons) == 0:
        raise SiteFileError("The KML file holds no Point or Polygon to use as the site.", "no_site")
    if len(points) + len(polygons) > 1:
        raise SiteFileError(
            f"The KML file holds {len(points) + len(polygons)} points or polygons; keep only the site in it.",
            "several_sites",
        )
    if points:
        coords = _kml_coordinates(points[0])
        if len(coords) != 1:
            raise SiteFileError("A KML Point has exactly one coordinate tuple.", "bad_coordinates")
        return {"type": "Point", "coordinates": coords[0]}
    outer = _find_all(polygons[0], "outerBoundaryIs")
    if not outer:
        raise SiteFileError("The KML polygon has no outer boundary.", "bad_coordinates")
    ring = _kml_coordinates(outer[0])
    return {"type": "Polygon", "coordinates": [_closed(ring)]}


def _gpx_points(elements: list[ET.Element]) -> list[list[float]]:
    out = []
    for e in elements:
        lat, lon = _number(e.get("lat"), "latitude"), _number(e.get("lon"), "longitude")
        ele = [c for c in e if _local(c.tag) == "ele"]
        out.append([lon, lat] + ([_number(ele[0].text, "elevation")] if ele else []))
    if out and not all(len(p) == 3 for p in out):
        out = [p[:2] for p in out]
    return out


def _from_gpx(root: ET.Element) -> dict:
    lines = [_gpx_points(_find_all(seg, "trkpt")) for seg in _find_all(root, "trkseg")]
    lines += [_gpx_points(_find_all(rte, "rtept")) for rte in _find_all(root, "rte")]
    lines = [line for line in lines if line]
    waypoints = _gpx_points([e for e in root if _local(e.tag) == "wpt"])
    if len(lines) > 1:
        raise SiteFileError(
            f"The GPX file holds {len(lines)} tracks or routes; keep only the site's outline in it.", "several_sites"
        )
    if lines:
        line = lines[0]
        if len(line) == 1:
            return {"type": "Point", "coordinates": line[0]}
        ring = _closed(line)
        if len(ring) < 4:
            raise SiteFileError(
                "A site outline needs at least three distinct points; this track or route has fewer.",
                "too_few_points",
            )
        return {"type": "Polygon", "coordinates": [ring]}
    if len(waypoints) == 1:
        return {"type": "Point", "coordinates": waypoints[0]}
    if len(waypoints) > 1:
        raise SiteFileError(
            f"The GPX file holds {len(waypoints)} waypoints and no track; give one waypoint for a site point or "
            "a track or route around the site.",
            "several_sites",
        )
    raise SiteFileError("The GPX file holds no waypoint, track or route.", "no_site")


def _closed(ring: list[list[float]]) -> list[list[float]]:
    return ring if ring and ring[0][:2] == ring[-1][:2] else ring + [list(ring[0])]


def _drop_heights(geometry: dict) -> dict:
    coords = geometry.get("coordinates")
    if geometry["type"] == "Point" and isinstance(coords, list):
        return {"type": "Point", "coordinates": coords[:2]}
    if geometry["type"] == "Polygon" and isinstance(coords, list):
        return {
            "type": "Polygon",
            "coordinates": [
                [p[:2] if isinstance(p, list) else p for p in ring] if isinstance(ring, list) else ring
                for ring in coords
            ],
        }
    return geometry
