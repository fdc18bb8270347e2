"""Web Mercator tile numbering ("XYZ" or "slippy map" tiles), for an optional basemap under our maps.

Source: the OpenStreetMap wiki, "Slippy map tilenames"
(https://wiki.openstreetmap.org/wiki/Slippy_map_tilenames; formulas quoted from memory). At zoom z
the world between latitudes ±85.0511° is a square of n × n tiles, n = 2**z, numbered from the
north-west corner (x eastward, y southward)::

    x = n · (λ + 180°) / 360°
    y = n · (1 − ln(tan φ + sec φ) / π) / 2
    λ = 360° · x / n − 180°
    φ = atan(sinh(π · (1 − 2 y / n)))

This is the spherical Mercator of EPSG:3857 (WGS 84 / Pseudo-Mercator) cut into tiles. The ground
width of one tile at latitude φ is 2π·a·cos φ / n with a = 6 378 137 m (the sphere radius of
EPSG:3857).

Frames: tile servers use WGS 84 latitude and longitude (EPSG:4326). Callers may pass latitudes and
longitudes in any modern ITRF-aligned or plate-fixed frame; the difference (a couple of metres at
most) does not matter for a basemap drawn for orientation only. Never use these numbers to place a
mark.
"""

from __future__ import annotations

import math

import numpy as np

#: Sphere radius of EPSG:3857 (m).
SPHERE_RADIUS_M = 6_378_137.0
#: Latitude where the Mercator square ends: atan(sinh(π)) (deg).
MAX_LAT_DEG = math.degrees(math.atan(math.sinh(math.pi)))  # 85.0511287798…
#: Deepest zoom we ask for (common practice: most XYZ servers stop between 18 and 20).
MAX_ZOOM = 19


def tile_xy_from_lonlat(lon_deg, lat_deg, zoom: int):
    """Fractional tile coordinates (x, y) of points at a zoom level.

    Latitudes beyond ±``MAX_LAT_DEG`` are clamped to it. Longitudes are not wrapped: a longitude
    of 181° gives x beyond n (the caller wraps x modulo n when it builds a tile address).

    Parameters
    ----------
    lon_deg, lat_deg : float or array_like
        Longitude and latitude (deg, WGS 84 / EPSG:4326 nominally).
    zoom : int
        Zoom level z (n = 2**z tiles on a side).

    Returns
    -------
    x, y : ndarray
        Fractional tile coordinates; the integer parts are the tile numbers.

    Examples
    --------
    >>> x, y = tile_xy_from_lonlat(0.0, 0.0, 1)
    >>> float(x), float(y)
    (1.0, 1.0)
    """
    n = 2.0**zoom
    lon = np.asarray(lon_deg, dtype=float)
    lat = np.radians(np.clip(np.asarray(lat_deg, dtype=float), -MAX_LAT_DEG, MAX_LAT_DEG))
    x = n * (lon + 180.0) / 360.0
    y = n * (1.0 - np.arcsinh(np.tan(lat)) / math.pi) / 2.0  # asinh(tan φ) = ln(tan φ + sec φ)
    return x, y


def lonlat_from_tile_xy(x, y, zoom: int):
    """Longitude and latitude (deg, WGS 84 / EPSG:4326 nominally) of tile coordinates.

    Integer (x, y) give the north-west corner of tile (x, y); (x + 1, y + 1) its south-east corner.

    Examples
    --------
    >>> lon, lat = lonlat_from_tile_xy(0, 0, 0)
    >>> float(lon), round(float(lat), 7)
    (-180.0, 85.0511288)
    """
    n = 2.0**zoom
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    lon = 360.0 * x / n - 180.0
    lat = np.degrees(np.arctan(np.sinh(math.pi * (1.0 - 2.0 * y / n))))
    return lon, lat


def tile_width_m(lat_deg, zoom: int):
    """Ground width (m) of one tile at a latitude: 2π·a·cos φ / 2**z.

    >>> round(float(tile_width_m(0.0, 0)))
    40075017
    """
    return 2.0 * math.pi * SPHERE_RADIUS_M * np.cos(np.radians(np.asarray(lat_deg, dtype=float))) / 2.0**zoom


def zoom_for_tile_px(lat_deg: float, px_per_m: float, *, target_px: float = 256.0, max_zoom: int = MAX_ZOOM) -> int:
    """The zoom at which one tile is closest to ``target_px`` on a drawing of ``px_per_m``.

    With the default target of 256 px a tile comes out between 256/√2 ≈ 181 px and 256·√2 ≈ 362 px
    (the zoom is rounded in log₂), unless the clamp to 0…``max_zoom`` acts.

    >>> zoom_for_tile_px(0.0, 256.0 / 40075016.686)
    0
    """
    width_m = float(tile_width_m(lat_deg, 0))
    z = round(math.log2(width_m * px_per_m / target_px))
    return int(min(max(z, 0), max_zoom))
