"""Geodetic ↔ ECEF ↔ local east/north/up conversions and covariance rotation.

Pure numpy (no Django). Every function accepts scalars or arrays (broadcast together) and returns
arrays of the broadcast shape (0-d arrays for scalar input; use ``float()`` if you need a Python float).
Coordinates are in the frame the caller states; this module only needs the frame's ellipsoid.

Sources
-------
- Forward conversion: the closed form X = (N + h) cosφ cosλ, Y = (N + h) cosφ sinλ,
  Z = (N(1 − e²) + h) sinφ with N = a / √(1 − e² sin²φ); e.g. B. Hofmann-Wellenhof, H. Lichtenegger,
  E. Wasle, *GNSS — Global Navigation Satellite Systems*, Springer 2008, §10.2.1.
- Inverse conversion: H. Vermeille, "Direct transformation from geocentric coordinates to geodetic
  coordinates", *Journal of Geodesy* 76 (2002) 451–454, doi:10.1007/s00190-002-0273-6 (closed form,
  exact outside a small region around the Earth's centre, well below |h| < 6000 km).
- Local ENU rotation and covariance propagation Σ_enu = R Σ_xyz Rᵀ: Hofmann-Wellenhof et al.,
  §10.2.2 (same book).

Checked in ``tests/geodesy/test_conversions.py`` against the ICSM GDA Technical Manual worked example
and PROJ (``+proj=cart``).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

__all__ = [
    "Ellipsoid",
    "GRS80",
    "WGS84",
    "ellipsoid_of_epsg",
    "geodetic_to_ecef",
    "ecef_to_geodetic",
    "enu_rotation_matrix",
    "ecef_to_enu_matrix",
    "ecef_delta_to_enu",
    "enu_delta_to_ecef",
    "geodetic_to_enu",
    "cov_ecef_to_enu",
    "cov_enu_to_ecef",
    "radii_of_curvature_m",
]


@dataclass(frozen=True)
class Ellipsoid:
    """A reference ellipsoid: semi-major axis ``a_m`` (metres) and flattening ``f``."""

    name: str
    a_m: float
    f: float

    @property
    def b_m(self) -> float:
        """Semi-minor axis b = a(1 − f), metres."""
        return self.a_m * (1.0 - self.f)

    @property
    def e2(self) -> float:
        """First eccentricity squared e² = f(2 − f)."""
        return self.f * (2.0 - self.f)


#: GRS80 (Moritz 1980, *Bulletin Géodésique* 54:395): a = 6 378 137 m, 1/f = 298.257222101.
GRS80 = Ellipsoid("GRS 1980", 6378137.0, 1.0 / 298.257222101)
#: WGS84 (NIMA TR8350.2): a = 6 378 137 m, 1/f = 298.257223563.
WGS84 = Ellipsoid("WGS 84", 6378137.0, 1.0 / 298.257223563)


@lru_cache(maxsize=128)
def ellipsoid_of_epsg(epsg: int) -> Ellipsoid:
    """The ellipsoid of the CRS with EPSG code ``epsg`` (read from PROJ's database).

    >>> ellipsoid_of_epsg(7912).name
    'GRS 1980'
    """
    import pyproj

    ell = pyproj.CRS.from_epsg(int(epsg)).ellipsoid
    if ell is None:
        raise ValueError(f"EPSG:{epsg} has no ellipsoid (is it a geodetic CRS?)")
    inv_f = ell.inverse_flattening
    f = 0.0 if not inv_f else 1.0 / inv_f
    return Ellipsoid(ell.name, float(ell.semi_major_metre), f)


def radii_of_curvature_m(lat_deg, ellipsoid: Ellipsoid = GRS80):
    """Meridian radius ρ and prime-vertical radius ν at latitude ``lat_deg``, in metres.

    ρ = a(1 − e²)/(1 − e² sin²φ)^{3/2}, ν = a/(1 − e² sin²φ)^{1/2}.

    >>> rho, nu = radii_of_curvature_m(0.0)
    >>> round(float(nu), 3), round(float(rho), 3)
    (6378137.0, 6335439.327)
    """
    phi = np.radians(np.asarray(lat_deg, dtype=float))
    w2 = 1.0 - ellipsoid.e2 * np.sin(phi) ** 2
    nu = ellipsoid.a_m / np.sqrt(w2)
    rho = ellipsoid.a_m * (1.0 - ellipsoid.e2) / (w2 * np.sqrt(w2))
    return rho, nu


def geodetic_to_ecef(lat_deg, lon_deg, h_m, *, ellipsoid: Ellipsoid = GRS80):
    """Geodetic latitude, longitude (degrees) and ellipsoidal height (m) → ECEF X, Y, Z (m).

    Parameters
    ----------
    lat_deg, lon_deg : array_like
        Geodetic latitude and longitude, degrees.
    h_m : array_like
        Ellipsoidal height, metres.
    ellipsoid : Ellipsoid
        The frame's ellipsoid (GRS80 by default).

    Returns
    -------
    x_m, y_m, z_m : ndarray
        Earth-centred, Earth-fixed coordinates in the same frame, metres.

    Examples
    --------
    >>> x, y, z = geodetic_to_ecef(0.0, 0.0, 0.0)
    >>> float(x), float(y), float(z)
    (6378137.0, 0.0, 0.0)
    """
    phi = np.radians(np.asarray(lat_deg, dtype=float))
    lam = np.radians(np.asarray(lon_deg, dtype=float))
    h = np.asarray(h_m, dtype=float)
    sphi = np.sin(phi)
    cphi = np.cos(phi)
    nu = ellipsoid.a_m / np.sqrt(1.0 - ellipsoid.e2 * sphi * sphi)
    x = (nu + h) * cphi * np.cos(lam)
    y = (nu + h) * cphi * np.sin(lam)
    z = (nu * (1.0 - ellipsoid.e2) + h) * sphi
    return x, y, z


def ecef_to_geodetic(x_m, y_m, z_m, *, ellipsoid: Ellipsoid = GRS80):
    """ECEF X, Y, Z (m) → geodetic latitude, longitude (degrees) and ellipsoidal height (m).

    Vermeille (2002) closed form, eqs. (1)–(9) of the paper; no iteration. Round trip with
    :func:`geodetic_to_ecef` closes to well under 0.1 mm for |h| < 10 km (tested).

    Examples
    --------
    >>> lat, lon, h = ecef_to_geodetic(6378137.0, 0.0, 0.0)
    >>> float(lat), float(lon), round(float(h), 9)
    (0.0, 0.0, 0.0)
    """
    x = np.asarray(x_m, dtype=float)
    y = np.asarray(y_m, dtype=float)
    z = np.asarray(z_m, dtype=float)
    a = ellipsoid.a_m
    e2 = ellipsoid.e2
    e4 = e2 * e2
    w2 = x * x + y * y
    w = np.sqrt(w2)
    p = w2 / (a * a)
    q = (1.0 - e2) / (a * a) * z * z
    r = (p + q - e4) / 6.0
    s = e4 * p * q / (4.0 * r**3)
    t = np.cbrt(1.0 + s + np.sqrt(s * (2.0 + s)))
    u = r * (1.0 + t + 1.0 / t)
    v = np.sqrt(u * u + e4 * q)
    ww = e2 * (u + v - q) / (2.0 * v)
    k = np.sqrt(u + v + ww * ww) - ww
    d = k * w / (k + e2)
    dz = np.sqrt(d * d + z * z)
    lat = 2.0 * np.arctan2(z, d + dz)
    h = (k + e2 - 1.0) / k * dz
    lon = np.arctan2(y, x)
    return np.degrees(lat), np.degrees(lon), h


def enu_rotation_matrix(lat_deg, lon_deg):
    """Rotation R from ECEF differences to local east/north/up at (lat, lon).

    Rows of R are the unit vectors e, n, u expressed in ECEF, so that ``d_enu = R @ d_xyz``.
    The shape is ``(..., 3, 3)`` for input of shape ``(...)``.

    >>> np.round(enu_rotation_matrix(0.0, 0.0), 12).tolist()
    [[-0.0, 1.0, 0.0], [-0.0, -0.0, 1.0], [1.0, 0.0, 0.0]]
    """
    phi = np.radians(np.asarray(lat_deg, dtype=float))
    lam = np.radians(np.asarray(lon_deg, dtype=float))
    phi, lam = np.broadcast_arrays(phi, lam)
    sp, cp, sl, cl = np.sin(phi), np.cos(phi), np.sin(lam), np.cos(lam)
    zero = np.zeros_like(sp)
    rot = np.stack(
        [
            np.stack([-sl, cl, zero], axis=-1),
            np.stack([-sp * cl, -sp * sl, cp], axis=-1),
            np.stack([cp * cl, cp * sl, sp], axis=-1),
        ],
        axis=-2,
    )
    return rot


#: Alias kept for the name used in the shared contracts.
ecef_to_enu_matrix = enu_rotation_matrix


def _trig(lat_deg, lon_deg):
    phi = np.radians(np.asarray(lat_deg, dtype=float))
    lam = np.radians(np.asarray(lon_deg, dtype=float))
    return np.sin(phi), np.cos(phi), np.sin(lam), np.cos(lam)


def ecef_delta_to_enu(dx_m, dy_m, dz_m, lat_deg, lon_deg):
    """Rotate ECEF differences (m) into local east, north, up (m) at (lat_deg, lon_deg).

    The rows of :func:`enu_rotation_matrix` written out (no 3×3 arrays: faster on many points).
    """
    sp, cp, sl, cl = _trig(lat_deg, lon_deg)
    dx, dy, dz = (np.asarray(v, dtype=float) for v in (dx_m, dy_m, dz_m))
    t = cl * dx + sl * dy
    e = -sl * dx + cl * dy
    n = -sp * t + cp * dz
    u = cp * t + sp * dz
    return e, n, u


def enu_delta_to_ecef(de_m, dn_m, du_m, lat_deg, lon_deg):
    """Rotate local east, north, up differences (m) at (lat_deg, lon_deg) into ECEF differences (m).

    The transpose of :func:`ecef_delta_to_enu`.
    """
    sp, cp, sl, cl = _trig(lat_deg, lon_deg)
    de, dn, du = (np.asarray(v, dtype=float) for v in (de_m, dn_m, du_m))
    t = -sp * dn + cp * du
    dx = -sl * de + cl * t
    dy = cl * de + sl * t
    dz = cp * dn + sp * du
    return dx, dy, dz


def geodetic_to_enu(lat_deg, lon_deg, h_m, *, lat0_deg, lon0_deg, h0_m, ellipsoid: Ellipsoid = GRS80):
    """Local east, north, up (m) of points relative to an origin, all in one frame.

    >>> e, n, u = geodetic_to_enu(0.0, 0.0, 10.0, lat0_deg=0.0, lon0_deg=0.0, h0_m=0.0)
    >>> round(float(e), 9), round(float(n), 9), round(float(u), 9)
    (0.0, 0.0, 10.0)
    """
    x, y, z = geodetic_to_ecef(lat_deg, lon_deg, h_m, ellipsoid=ellipsoid)
    x0, y0, z0 = geodetic_to_ecef(lat0_deg, lon0_deg, h0_m, ellipsoid=ellipsoid)
    return ecef_delta_to_enu(x - x0, y - y0, z - z0, lat0_deg, lon0_deg)


def cov_ecef_to_enu(cov_xyz_m2, lat_deg, lon_deg):
    """Rotate a 3×3 ECEF covariance (m²) into local ENU at (lat, lon): Σ_enu = R Σ_xyz Rᵀ.

    ``cov_xyz_m2`` has shape ``(..., 3, 3)``; the result has the same shape.
    """
    rot = enu_rotation_matrix(lat_deg, lon_deg)
    cov = np.asarray(cov_xyz_m2, dtype=float)
    return rot @ cov @ np.swapaxes(rot, -1, -2)


def cov_enu_to_ecef(cov_enu_m2, lat_deg, lon_deg):
    """Rotate a 3×3 local ENU covariance (m²) at (lat, lon) into ECEF: Σ_xyz = Rᵀ Σ_enu R."""
    rot = enu_rotation_matrix(lat_deg, lon_deg)
    cov = np.asarray(cov_enu_m2, dtype=float)
    return np.swapaxes(rot, -1, -2) @ cov @ rot
