"""Proximity on the ellipsoid: search boxes and exact geodesic distances.

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
"""

from __future__ import annotations

import math
from dataclasses import dataclass

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

_GEOD = pyproj.Geod(ellps="GRS80")


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
