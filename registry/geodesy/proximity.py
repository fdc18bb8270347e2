"""Proximity on the ellipsoid: search boxes, exact geodesic distances, distance to a site polygon.

Used by the nearby-mark search (``registry.selectors.nearby``). Pure computation, no Django.

Sources
-------
- Geodesic inverse/direct problems: C. F. F. Karney, "Algorithms for geodesics",
  *J. Geodesy* 87 (2013) 43–55, doi:10.1007/s00190-012-0578-z, as implemented by
  PROJ's ``geod`` (pyproj ``Geod``). Ellipsoid GRS80 (a = 6 378 137 m,
  1/f = 298.257222101; H. Moritz, "Geodetic Reference System 1980", *Bulletin
  Géodésique* 54 (1980) 395–405). WGS 84 differs from GRS80 only in 1/f
  (298.257223563): b differs by 0.105 mm, so distances up to 20 000 km differ by
  well under 1 mm, and for the tens of kilometres searched here by a few nanometres.
- Radii of curvature: meridian M(φ) = a(1−e²)/(1−e² sin²φ)^{3/2} and prime vertical
  N(φ) = a/(1−e² sin²φ)^{1/2} (e.g. W. Torge & J. Müller, *Geodesy*, 4th ed., de
  Gruyter 2012, §3.2.2; B. Hofmann-Wellenhof & H. Moritz, *Physical Geodesy*, 2nd
  ed., 2006, §5.3). Along any curve, dφ/ds = cos α / M and dλ/ds = sin α / (N cos φ),
  so a point within geodesic distance ρ of (φ0, λ0) has |φ − φ0| ≤ ρ / min M =
  ρ / (a(1−e²)) and |λ − λ0| ≤ ρ / (a cos φ_far), φ_far being the latitude of the box
  edge nearest a pole (N ≥ a). These two bounds make the latitude/longitude search box
  conservative: no point within ρ lies outside it.
- Sphere versus ellipsoid (for the PostGIS prefilter, which measures on a sphere of
  radius R): mapping the ellipsoid onto a sphere with the same latitude and longitude
  scales every line element by a factor between min(M, N)/R = a(1−e²)/R and
  max(M, N)/R = a/√(1−e²)/R, so every geodesic distance lies between those factors
  times the spherical distance. With PostGIS's R = (2a + b)/3 (IUGG mean radius R1)
  these are 0.99442 and 1.00449 (see ``sphere_distance_factors``).
- Point-in-polygon: the even–odd (crossing number) rule, e.g. J. O'Rourke,
  *Computational Geometry in C*, 2nd ed., Cambridge 1998, §7.4.

Polygon edges are taken as geodesics. RFC 7946 draws them as straight lines in
longitude/latitude; for site polygons of a few kilometres the two differ by
millimetres at most, far below what a search for nearby marks needs.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import pyproj

#: GRS80 semi-major axis (m) and flattening (Moritz 1980).
GRS80_A_M = 6_378_137.0
GRS80_F = 1.0 / 298.257222101
#: WGS 84 semi-major axis and flattening (NIMA TR8350.2, 3rd ed., 2000, table 3.1).
WGS84_A_M = 6_378_137.0
WGS84_F = 1.0 / 298.257223563

#: Relative safety added to the search box and sphere bounds: covers floating-point
#: rounding of stored coordinates; 1e-9 of 20 000 km is 2 cm, far inside the margins.
_REL_MARGIN = 1e-9
#: Absolute safety added to box half-widths (degrees; 1e-9° ≈ 0.1 mm).
_ABS_MARGIN_DEG = 1e-9

#: Largest extent of a site polygon accepted by ``distance_to_polygon_m`` (m).
MAX_POLYGON_EXTENT_M = 200_000.0

_GEOD = pyproj.Geod(ellps="GRS80")


class PolygonError(ValueError):
    """A site polygon that cannot be used; ``code`` is machine readable."""

    def __init__(self, message: str, *, code: str):
        super().__init__(message)
        self.code = code
        self.message = message


@dataclass(frozen=True)
class SearchBox:
    """A latitude/longitude box that contains every point within a geodesic radius.

    Attributes
    ----------
    lat_min_deg, lat_max_deg : float
        Latitude range (degrees), clipped to [-90, 90].
    lon_ranges_deg : tuple of (float, float)
        One longitude range, or two when the box crosses the antimeridian
        (each within [-180, 180]). ``((-180.0, 180.0),)`` when the box reaches a pole
        or is wider than the globe.
    """

    lat_min_deg: float
    lat_max_deg: float
    lon_ranges_deg: tuple[tuple[float, float], ...]

    @property
    def all_longitudes(self) -> bool:
        return self.lon_ranges_deg == ((-180.0, 180.0),)

    def contains(self, lat_deg, lon_deg) -> np.ndarray:
        """Which points (degrees) lie in the box (vectorised; edges inclusive)."""
        lat = np.asarray(lat_deg, dtype=float)
        lon = np.asarray(lon_deg, dtype=float)
        inside_lon = np.zeros(np.broadcast(lat, lon).shape, dtype=bool)
        for lo, hi in self.lon_ranges_deg:
            inside_lon |= (lon >= lo) & (lon <= hi)
        return (lat >= self.lat_min_deg) & (lat <= self.lat_max_deg) & inside_lon


def search_box(
    lat_deg: float, lon_deg: float, radius_m: float, *, a_m: float = GRS80_A_M, f: float = GRS80_F
) -> SearchBox:
    """Latitude/longitude box holding every point within ``radius_m`` of a point.

    Parameters
    ----------
    lat_deg, lon_deg : float
        Centre (degrees) on the ellipsoid (a_m, f); any frame, the box is frame-agnostic.
    radius_m : float
        Geodesic radius (m), ≥ 0.

    Returns
    -------
    SearchBox
        Conservative: no point within the radius lies outside (module docstring).
        It splits in two across the antimeridian and covers all longitudes once it
        reaches a pole.

    Examples
    --------
    >>> box = search_box(45.0, 179.99, 5000.0)
    >>> len(box.lon_ranges_deg)
    2
    >>> search_box(89.99, 10.0, 5000.0).all_longitudes
    True
    """
    if not (math.isfinite(lat_deg) and math.isfinite(lon_deg) and math.isfinite(radius_m)) or radius_m < 0:
        raise ValueError("search_box needs finite coordinates and a radius ≥ 0")
    e2 = f * (2.0 - f)
    dlat_deg = math.degrees(radius_m / (a_m * (1.0 - e2))) * (1.0 + _REL_MARGIN) + _ABS_MARGIN_DEG
    lat_lo = lat_deg - dlat_deg
    lat_hi = lat_deg + dlat_deg
    if lat_lo <= -90.0 or lat_hi >= 90.0:
        return SearchBox(max(lat_lo, -90.0), min(lat_hi, 90.0), ((-180.0, 180.0),))
    far_rad = math.radians(max(abs(lat_lo), abs(lat_hi)))
    dlon_deg = math.degrees(radius_m / (a_m * math.cos(far_rad))) * (1.0 + _REL_MARGIN) + _ABS_MARGIN_DEG
    if dlon_deg >= 180.0:
        return SearchBox(lat_lo, lat_hi, ((-180.0, 180.0),))
    lon_lo = lon_deg - dlon_deg
    lon_hi = lon_deg + dlon_deg
    ranges: tuple[tuple[float, float], ...]
    if lon_lo < -180.0:
        ranges = ((lon_lo + 360.0, 180.0), (-180.0, lon_hi))
    elif lon_hi > 180.0:
        ranges = ((lon_lo, 180.0), (-180.0, lon_hi - 360.0))
    else:
        ranges = ((lon_lo, lon_hi),)
    return SearchBox(lat_lo, lat_hi, ranges)


def sphere_distance_factors(
    *, a_m: float = WGS84_A_M, f: float = WGS84_F, sphere_radius_m: float | None = None
) -> tuple[float, float]:
    """Bounds (lo, hi) with lo·d_sphere ≤ d_ellipsoid ≤ hi·d_sphere for every pair of points.

    The sphere carries the same latitude and longitude as the ellipsoid (as PostGIS
    does for ``geography`` with ``use_spheroid = false`` and for the ``<->`` operator).
    Default radius: R1 = (2a + b)/3, the radius PostGIS uses for SRID 4326.

    Examples
    --------
    >>> lo, hi = sphere_distance_factors()
    >>> round(lo, 5), round(hi, 5)
    (0.99442, 1.00449)
    """
    b_m = a_m * (1.0 - f)
    radius_m = (2.0 * a_m + b_m) / 3.0 if sphere_radius_m is None else sphere_radius_m
    e2 = f * (2.0 - f)
    lo = a_m * (1.0 - e2) / radius_m
    hi = a_m / math.sqrt(1.0 - e2) / radius_m
    return lo * (1.0 - _REL_MARGIN), hi * (1.0 + _REL_MARGIN)


def geodesic_inverse(lat1_deg, lon1_deg, lat2_deg, lon2_deg) -> tuple[np.ndarray, np.ndarray]:
    """Geodesic distance (m) and forward azimuth at point 1 (degrees, [0, 360)) on GRS80.

    Vectorised (numpy broadcasting). Karney (2013) through pyproj ``Geod.inv``.

    Examples
    --------
    >>> d, az = geodesic_inverse(40.0, 0.0, 41.0, 1.0)
    >>> round(float(d), 3), round(float(az), 6)
    (139698.755, 37.0333)
    """
    lat1, lon1, lat2, lon2 = np.broadcast_arrays(
        *(np.asarray(x, dtype=float) for x in (lat1_deg, lon1_deg, lat2_deg, lon2_deg))
    )
    if lat1.size == 0:
        return np.zeros(lat1.shape), np.zeros(lat1.shape)
    az12, _az21, dist = _GEOD.inv(np.ravel(lon1), np.ravel(lat1), np.ravel(lon2), np.ravel(lat2))
    dist_m = np.asarray(dist, dtype=float).reshape(lat1.shape)
    az_deg = np.mod(np.asarray(az12, dtype=float), 360.0).reshape(lat1.shape)
    return dist_m, az_deg


def _geodesic_forward(lat_deg, lon_deg, az_deg, dist_m) -> tuple[np.ndarray, np.ndarray]:
    lon2, lat2, _ = _GEOD.fwd(np.ravel(lon_deg), np.ravel(lat_deg), np.ravel(az_deg), np.ravel(dist_m))
    return np.asarray(lat2, dtype=float), np.asarray(lon2, dtype=float)


# --------------------------------------------------------------------------- polygons


@dataclass(frozen=True)
class SitePolygon:
    """A parsed site polygon: exterior ring first, then holes; each (n, 2) [lat, lon] degrees, closed."""

    rings_latlon_deg: tuple[np.ndarray, ...]
    centre_lat_deg: float
    centre_lon_deg: float
    enclosing_radius_m: float


def _ring(raw: Any, where: str) -> np.ndarray:
    if not isinstance(raw, list) or len(raw) < 4:
        raise PolygonError(f"{where}: a ring needs at least four positions (closed).", code="polygon_ring_short")
    pts = []
    for pos in raw:
        if not (
            isinstance(pos, list | tuple)
            and len(pos) >= 2
            and all(isinstance(v, int | float) and not isinstance(v, bool) for v in pos[:2])
        ):
            raise PolygonError(f"{where}: every position is [longitude, latitude] in degrees.", code="polygon_position")
        lon, lat = float(pos[0]), float(pos[1])
        if not (math.isfinite(lat) and math.isfinite(lon) and -90.0 <= lat <= 90.0 and -180.0 <= lon <= 180.0):
            raise PolygonError(
                f"{where}: latitude must be within ±90° and longitude within ±180°.", code="polygon_range"
            )
        pts.append((lat, lon))
    ring = np.array(pts, dtype=float)
    if not np.array_equal(ring[0], ring[-1]):
        raise PolygonError(
            f"{where}: the first and last positions must be equal (RFC 7946 §3.1.6).", code="polygon_not_closed"
        )
    return ring


def parse_site_polygon(value: Any) -> SitePolygon:
    """Parse a GeoJSON Polygon (or a Feature holding one; RFC 7946, longitude first).

    Raises
    ------
    PolygonError
        With a machine-readable ``code`` for anything not usable.

    Examples
    --------
    >>> poly = parse_site_polygon({"type": "Polygon", "coordinates": [[[-110.61, 45.19], [-110.59, 45.19],
    ...     [-110.59, 45.21], [-110.61, 45.21], [-110.61, 45.19]]]})
    >>> round(poly.centre_lat_deg, 6), round(poly.centre_lon_deg, 6)
    (45.2, -110.6)
    """
    if isinstance(value, dict) and value.get("type") == "Feature":
        value = value.get("geometry")
    if not isinstance(value, dict) or value.get("type") != "Polygon":
        raise PolygonError("The site must be a GeoJSON Polygon.", code="polygon_type")
    coords = value.get("coordinates")
    if not isinstance(coords, list) or not coords:
        raise PolygonError("A Polygon needs at least its exterior ring.", code="polygon_empty")
    rings = [_ring(raw, "exterior ring" if i == 0 else f"hole {i}") for i, raw in enumerate(coords)]
    outer = rings[0]
    # Centre: vertex mean with longitudes unwrapped around the first vertex (antimeridian-safe).
    lon_ref = outer[0, 1]
    lon_unwrapped = lon_ref + (np.mod(outer[:-1, 1] - lon_ref + 180.0, 360.0) - 180.0)
    centre_lat = float(np.mean(outer[:-1, 0]))
    centre_lon = float(np.mod(np.mean(lon_unwrapped) + 180.0, 360.0) - 180.0)
    all_pts = np.vstack(rings)
    dist_m, _ = geodesic_inverse(centre_lat, centre_lon, all_pts[:, 0], all_pts[:, 1])
    radius_m = float(dist_m.max())
    if 2.0 * radius_m > MAX_POLYGON_EXTENT_M:
        raise PolygonError(
            f"The site polygon is larger than {MAX_POLYGON_EXTENT_M / 1000:.0f} km across.", code="polygon_too_large"
        )
    return SitePolygon(tuple(rings), centre_lat, centre_lon, radius_m)


def _points_in_rings(x, y, rings_xy: list[np.ndarray]) -> np.ndarray:
    """Even–odd rule over all rings (holes included) on a plane."""
    inside = np.zeros(np.shape(x), dtype=bool)
    for ring in rings_xy:
        x1, y1 = ring[:-1, 0], ring[:-1, 1]
        x2, y2 = ring[1:, 0], ring[1:, 1]
        xi = x[:, None]
        yi = y[:, None]
        crosses = (y1 > yi) != (y2 > yi)
        with np.errstate(divide="ignore", invalid="ignore"):
            x_at = x1 + (yi - y1) * (x2 - x1) / (y2 - y1)
        inside ^= np.logical_xor.reduce(crosses & (xi < x_at), axis=1)
    return inside


def _segment_distance_plane(px, py, ax, ay, bx, by) -> np.ndarray:
    """Planar distance of points (px, py)[:, None] to segments (a, b)[None, :]."""
    dx, dy = bx - ax, by - ay
    len2 = dx * dx + dy * dy
    with np.errstate(divide="ignore", invalid="ignore"):
        t = ((px[:, None] - ax) * dx + (py[:, None] - ay) * dy) / len2
    t = np.where(len2 > 0, np.clip(t, 0.0, 1.0), 0.0)
    qx = ax + t * dx
    qy = ay + t * dy
    return np.hypot(px[:, None] - qx, py[:, None] - qy)


_GOLDEN = (math.sqrt(5.0) - 1.0) / 2.0


def _geodesic_segment_distance(lat_deg, lon_deg, a_lat, a_lon, b_lat, b_lon, iterations: int = 48):
    """Exact geodesic distance from points to geodesic segments A→B (pairwise arrays).

    Golden-section search over the fraction t ∈ [0, 1] along the segment, then the
    better of that minimum and the two end points (so a segment whose interior holds
    a distance *maximum* still yields its true minimum). 48 iterations shrink the
    bracket to 0.618⁴⁸ ≈ 1e-10 of the segment length.

    Returns distance (m) and the forward azimuth (degrees) from the nearest segment
    point to the point.
    """
    seg_len_m, seg_az_deg = geodesic_inverse(a_lat, a_lon, b_lat, b_lon)

    def dist_at(t):
        q_lat, q_lon = _geodesic_forward(a_lat, a_lon, seg_az_deg, t * seg_len_m)
        return geodesic_inverse(q_lat, q_lon, lat_deg, lon_deg)[0]

    lo = np.zeros_like(seg_len_m)
    hi = np.ones_like(seg_len_m)
    c = hi - _GOLDEN * (hi - lo)
    d = lo + _GOLDEN * (hi - lo)
    fc, fd = dist_at(c), dist_at(d)
    for _ in range(iterations):
        left = fc < fd
        hi = np.where(left, d, hi)
        lo = np.where(left, lo, c)
        c_new = hi - _GOLDEN * (hi - lo)
        d_new = lo + _GOLDEN * (hi - lo)
        # Reuse the surviving interior point; evaluate only the new one.
        new_t = np.where(left, c_new, d_new)
        f_new = dist_at(new_t)
        fd, d, fc, c = (
            np.where(left, fc, f_new),
            np.where(left, c, d_new),
            np.where(left, f_new, fd),
            np.where(left, c_new, d),
        )
    t_best = (lo + hi) / 2.0
    candidates_t = np.stack([t_best, np.zeros_like(t_best), np.ones_like(t_best)])
    candidates_d = np.stack([dist_at(t_best), dist_at(candidates_t[1]), dist_at(candidates_t[2])])
    pick = np.argmin(candidates_d, axis=0)
    t_pick = np.take_along_axis(candidates_t, pick[None, :], axis=0)[0]
    q_lat, q_lon = _geodesic_forward(a_lat, a_lon, seg_az_deg, t_pick * seg_len_m)
    return geodesic_inverse(q_lat, q_lon, lat_deg, lon_deg)


def distance_to_polygon_m(polygon: SitePolygon, lat_deg, lon_deg) -> tuple[np.ndarray, np.ndarray]:
    """Geodesic distance (m) from points to a site polygon, 0 inside; GRS80.

    Parameters
    ----------
    polygon : SitePolygon
        From ``parse_site_polygon``; latitude/longitude in the same frame as the points.
    lat_deg, lon_deg : array_like
        Points (degrees).

    Returns
    -------
    distance_m : ndarray
        0 for points inside the polygon (even–odd rule; points in holes are outside).
    azimuth_deg : ndarray
        Forward azimuth from the nearest boundary point to the point, [0, 360);
        NaN for points inside.

    Notes
    -----
    Inside/outside is decided on a local azimuthal equidistant plane centred on the
    polygon, where a geodesic edge of a site within 100 km departs from a straight
    line by well under a millimetre; boundary distances are exact geodesic minima
    (``_geodesic_segment_distance``) over the edges that the plane shows as nearest
    (within 1 % + 1 m, far more than the plane's distortion).

    Examples
    --------
    >>> poly = parse_site_polygon({"type": "Polygon", "coordinates": [[[0, 0], [0.01, 0], [0.01, 0.01],
    ...     [0, 0.01], [0, 0]]]})
    >>> d, az = distance_to_polygon_m(poly, [0.005, 0.005], [0.005, 0.02])
    >>> float(d[0]), round(float(d[1]), 3)
    (0.0, 1113.195)
    """
    lat = np.atleast_1d(np.asarray(lat_deg, dtype=float))
    lon = np.atleast_1d(np.asarray(lon_deg, dtype=float))
    n = lat.size
    if n == 0:
        return np.zeros(0), np.zeros(0)
    plane = pyproj.Proj(proj="aeqd", lat_0=polygon.centre_lat_deg, lon_0=polygon.centre_lon_deg, ellps="GRS80")
    px, py = plane(lon, lat)
    px, py = np.asarray(px, dtype=float), np.asarray(py, dtype=float)
    rings_xy = []
    for ring in polygon.rings_latlon_deg:
        rx, ry = plane(ring[:, 1], ring[:, 0])
        rings_xy.append(np.column_stack([rx, ry]))
    inside = _points_in_rings(px, py, rings_xy)

    # Edges of all rings, in the plane and in latitude/longitude.
    ax = np.concatenate([r[:-1, 0] for r in rings_xy])
    ay = np.concatenate([r[:-1, 1] for r in rings_xy])
    bx = np.concatenate([r[1:, 0] for r in rings_xy])
    by = np.concatenate([r[1:, 1] for r in rings_xy])
    a_ll = np.vstack([r[:-1] for r in polygon.rings_latlon_deg])
    b_ll = np.vstack([r[1:] for r in polygon.rings_latlon_deg])
    plane_d = _segment_distance_plane(px, py, ax, ay, bx, by)  # (n, edges)
    near = plane_d <= plane_d.min(axis=1, keepdims=True) * 1.01 + 1.0
    near &= ~inside[:, None]
    pi, ei = np.nonzero(near)

    distance_m = np.zeros(n)
    azimuth_deg = np.full(n, np.nan)
    if pi.size:
        d, az = _geodesic_segment_distance(lat[pi], lon[pi], a_ll[ei, 0], a_ll[ei, 1], b_ll[ei, 0], b_ll[ei, 1])
        best = np.full(n, np.inf)
        best_az = np.full(n, np.nan)
        order = np.lexsort((d, pi))  # by point, then distance: first of each point is its minimum
        first = np.ones(order.size, dtype=bool)
        first[1:] = pi[order][1:] != pi[order][:-1]
        sel = order[first]
        best[pi[sel]] = d[sel]
        best_az[pi[sel]] = az[sel]
        outside = ~inside
        distance_m[outside] = best[outside]
        azimuth_deg[outside] = best_az[outside]
    return distance_m, azimuth_deg
