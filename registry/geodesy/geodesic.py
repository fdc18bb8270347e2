"""Geodesic inverse and direct (forward) problems on the frame's ellipsoid.

Pure module (no Django); a thin, vectorised wrapper around ``pyproj.Geod``, which implements
C. F. F. Karney, "Algorithms for geodesics", *Journal of Geodesy* 87 (2013) 43–55,
doi:10.1007/s00190-012-0578-z (accurate to about 15 nm, convergent for all pairs of points,
including nearly antipodal ones where Vincenty's 1975 iteration fails).

Azimuth convention (pinned in ``tests/geodesy/test_geodesic.py``)
---------------------------------------------------------------
- ``azimuth12_deg``: the azimuth of the geodesic at point 1 towards point 2, clockwise from north.
- ``azimuth21_deg``: the azimuth at point 2 *towards point 1* (the "back" or "reverse" azimuth),
  as ``pyproj.Geod`` returns it. Vincenty's (1975) Table II α2 and GeographicLib's ``azi2`` are the
  *forward* azimuth at point 2 (the line continued beyond point 2): α2 = azimuth21 ± 180°.
"""

from __future__ import annotations

from functools import lru_cache
from typing import NamedTuple

import numpy as np

from registry.geodesy.conversions import GRS80, Ellipsoid

__all__ = ["GeodesicInverse", "GeodesicForward", "inverse", "forward", "geod_for"]


class GeodesicInverse(NamedTuple):
    distance_m: np.ndarray
    azimuth12_deg: np.ndarray
    azimuth21_deg: np.ndarray


class GeodesicForward(NamedTuple):
    lat2_deg: np.ndarray
    lon2_deg: np.ndarray
    azimuth21_deg: np.ndarray


@lru_cache(maxsize=32)
def geod_for(ellipsoid: Ellipsoid = GRS80):
    """A cached ``pyproj.Geod`` on ``ellipsoid``."""
    import pyproj

    return pyproj.Geod(a=ellipsoid.a_m, f=ellipsoid.f)


def _arrays(*values):
    arrs = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in values))
    return [np.array(a, dtype=float, order="C") for a in arrs]


def inverse(lat1_deg, lon1_deg, lat2_deg, lon2_deg, *, ellipsoid: Ellipsoid = GRS80) -> GeodesicInverse:
    """Distance and azimuths between two points of one frame.

    Parameters
    ----------
    lat1_deg, lon1_deg, lat2_deg, lon2_deg : array_like
        Geodetic coordinates (degrees) in the same frame, broadcast together.
    ellipsoid : Ellipsoid
        The frame's ellipsoid (GRS80 by default).

    Returns
    -------
    GeodesicInverse
        ``distance_m`` (metres on the ellipsoid), ``azimuth12_deg`` in [0, 360), and
        ``azimuth21_deg`` (back azimuth at point 2 towards point 1) in [0, 360).

    Examples
    --------
    >>> r = inverse(0.0, 0.0, 0.0, 1.0)
    >>> round(float(r.distance_m), 3), float(r.azimuth12_deg), float(r.azimuth21_deg)
    (111319.491, 90.0, 270.0)
    """
    lat1, lon1, lat2, lon2 = _arrays(lat1_deg, lon1_deg, lat2_deg, lon2_deg)
    _check_lat(lat1, lat2)
    shape = lat1.shape
    az12, az21, dist = geod_for(ellipsoid).inv(lon1.ravel(), lat1.ravel(), lon2.ravel(), lat2.ravel())
    return GeodesicInverse(
        np.asarray(dist).reshape(shape), _norm360(az12).reshape(shape), _norm360(az21).reshape(shape)
    )


def forward(lat1_deg, lon1_deg, azimuth12_deg, distance_m, *, ellipsoid: Ellipsoid = GRS80) -> GeodesicForward:
    """The point reached from point 1 along a geodesic of given azimuth and length.

    Returns
    -------
    GeodesicForward
        ``lat2_deg``, ``lon2_deg`` (in [-180, 180)) and ``azimuth21_deg`` (back azimuth at point 2
        towards point 1, in [0, 360)).

    Examples
    --------
    >>> r = forward(0.0, 0.0, 90.0, 111319.4907932736)
    >>> round(float(r.lat2_deg), 9), round(float(r.lon2_deg), 9)
    (0.0, 1.0)
    """
    lat1, lon1, az12, dist = _arrays(lat1_deg, lon1_deg, azimuth12_deg, distance_m)
    _check_lat(lat1)
    shape = lat1.shape
    lon2, lat2, az21 = geod_for(ellipsoid).fwd(lon1.ravel(), lat1.ravel(), az12.ravel(), dist.ravel())
    return GeodesicForward(
        np.asarray(lat2).reshape(shape), np.asarray(lon2).reshape(shape), _norm360(az21).reshape(shape)
    )


def _norm360(angle_deg):
    r = np.mod(np.asarray(angle_deg, dtype=float), 360.0)
    return np.where(r >= 360.0, r - 360.0, r)


def _check_lat(*lats):
    for lat in lats:
        if not np.all(np.isfinite(lat)) or np.any(np.abs(lat) > 90.0):
            raise ValueError("latitude must be finite and within -90..90 degrees")
