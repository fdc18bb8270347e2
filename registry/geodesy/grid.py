"""Projected grid coordinates, UTM zones, point scale factor, convergence, elevation and combined factors.

Pure module (no Django). Grid coordinates come from PROJ (pyproj) for any EPSG projected CRS or for
UTM on the frame's own ellipsoid; the point scale factor and meridian convergence come from
``pyproj.Proj.get_factors`` and, for transverse Mercator, are checked in the tests against the
independent analytic series in :func:`tm_factors_kruger`.

Sources
-------
- Transverse Mercator (Krüger series to n⁶): C. F. F. Karney, "Transverse Mercator with an accuracy
  of a few nanometers", *Journal of Geodesy* 85 (2011) 475–485, doi:10.1007/s00190-011-0445-3;
  eqs. (7)–(9) (conformal latitude), (11) (ξ′, η′), (35) (α coefficients), (26)–(28) (γ, k).
- UTM zones, including the Norway (32V) and Svalbard (31X–37X) exceptions: NIMA TM 8358.2,
  *The Universal Grids: UTM and UPS* (1989), §2-3 [from memory; the rule itself is common practice].
- Elevation factor EF = R / (R + h) with h the *ellipsoidal* height, combined factor CF = k × EF,
  grid distance = ground (horizontal, at mark height) distance × CF: J. E. Stem, *State Plane
  Coordinate System of 1983*, NOAA Manual NOS NGS 5 (1989), and M. L. Dennis, *The State Plane
  Coordinate System*, NOAA SP NOS NGS 13 (2018) [attribution from memory; formulas are standard].

Conventions (pinned in ``tests/geodesy/test_grid.py``)
------------------------------------------------------
- Meridian convergence γ is the angle from true north to grid north, clockwise positive (the sign
  ``pyproj``'s ``get_factors`` gives), so γ ≈ Δλ · sin φ (positive east of the central meridian in the
  northern hemisphere), and **grid azimuth t = geodetic azimuth α − γ** (arc-to-chord correction
  neglected). Some published manuals define γ the other way round and write "grid bearing = azimuth
  + γ"; their γ is the negative of ours.
- Elevation factor radius: by default the Gaussian mean radius √(ρν) at the point's latitude.
  The radius in the line's azimuth R_α differs from it by up to ±0.17 % (about ±10.7 km at 45°),
  which changes EF by h·ΔR/R², at most about 2.6e-7 (0.26 ppm) at h = 1 km — below the precision of
  a ground distance for most work; give ``radius_m`` for a line-specific factor.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import TYPE_CHECKING

import numpy as np

from registry.geodesy.conversions import GRS80, Ellipsoid, ellipsoid_of_epsg, radii_of_curvature_m
from registry.geodesy.frames import crs_label

if TYPE_CHECKING:
    import pyproj

__all__ = [
    "FOOT_M",
    "US_SURVEY_FOOT_M",
    "UNITS",
    "outside_area",
    "area_of_use_warnings",
    "native_units",
    "GridError",
    "GridCRS",
    "GridCoordinates",
    "utm_zone",
    "utm_grid",
    "resolve_grid",
    "to_grid",
    "from_grid",
    "point_factors",
    "tm_factors_kruger",
    "radius_gaussian_m",
    "radius_in_azimuth_m",
    "elevation_factor",
    "combined_factor",
    "grid_distance_m",
    "ground_distance_m",
]


#: Block size for the analytic factors (points); keeps numpy temporaries in the CPU cache.
_BLOCK = 32768


class GridError(ValueError):
    """A grid could not be used for these coordinates; ``code`` says why."""

    def __init__(self, message: str, *, code: str):
        super().__init__(message)
        self.code = code


#: Length units of grids, by PROJ's unit name: (our label, metres per unit, legacy?).
#: International foot = 0.3048 m exactly; US survey foot = 1200/3937 m, deprecated in the United
#: States from 2023 (NIST/NOAA Federal Register notice 85 FR 62698, 2020; from memory) — "legacy".
FOOT_M = 0.3048
US_SURVEY_FOOT_M = 1200.0 / 3937.0
UNITS = {
    "metre": ("metre", 1.0, False),
    "foot": ("international foot", FOOT_M, False),
    "US survey foot": ("US survey foot", US_SURVEY_FOOT_M, True),
}


@dataclass(frozen=True)
class GridCRS:
    """A projected CRS ready for use.

    ``epsg``: its EPSG code (None when not registered); ``code``: the registry's own code for a
    custom grid (None otherwise); ``area``: its area of use (west, south, east, north in degrees;
    west > east when it crosses the antimeridian) and ``area_name``; ``unit_name``: PROJ's name of
    the axis unit (``unit_to_m`` metres per unit).
    """

    crs: pyproj.CRS
    epsg: int | None
    name: str
    unit_to_m: float
    code: str | None = None
    area: tuple[float, float, float, float] | None = None
    area_name: str = ""
    unit_name: str = "metre"

    @property
    def label(self) -> str:
        if self.code:
            return f"{self.name} (custom grid {self.code})"
        return crs_label(self.name, self.epsg) if self.epsg else f"{self.name} (no EPSG code)"

    @property
    def in_feet(self) -> bool:
        return self.unit_name in ("foot", "US survey foot")

    def as_dict(self) -> dict:
        return {"epsg": self.epsg, "name": self.name, "custom_code": self.code}


@dataclass(frozen=True)
class GridCoordinates:
    easting_m: np.ndarray
    northing_m: np.ndarray
    scale_factor: np.ndarray
    convergence_deg: np.ndarray
    grid: GridCRS
    #: Sentences for the user: e.g. points outside the grid's area of use.
    warnings: tuple[str, ...] = ()


# ---------------------------------------------------------------------------------------------
# UTM zones
# ---------------------------------------------------------------------------------------------


def utm_zone(lat_deg, lon_deg):
    """UTM zone number and hemisphere for points, with the Norway and Svalbard exceptions.

    Parameters
    ----------
    lat_deg, lon_deg : array_like
        Latitude in [-80, 84] (UTM's range; polar regions use UPS, not provided) and longitude.

    Returns
    -------
    zone : ndarray of int
        1–60.
    north : ndarray of bool
        True for the northern hemisphere (latitude ≥ 0).

    Examples
    --------
    >>> z, n = utm_zone(45.2, -110.6)
    >>> int(z), bool(n)
    (12, True)
    >>> int(utm_zone(60.0, 5.0)[0])   # south-west Norway: 32V is widened to 3°E
    32
    >>> int(utm_zone(78.0, 15.0)[0])  # Svalbard: 33X spans 9°E–21°E
    33
    """
    lat = np.asarray(lat_deg, dtype=float)
    lon = np.asarray(lon_deg, dtype=float)
    if not (np.all(np.isfinite(lat)) and np.all(np.isfinite(lon))):
        raise GridError("Latitude and longitude must be finite.", code="not_finite")
    if np.any(lat < -80.0) or np.any(lat > 84.0):
        raise GridError(
            "UTM covers latitudes 80°S to 84°N; polar regions need UPS (not provided) or a local grid.",
            code="outside_utm",
        )
    lon_n = np.mod(lon + 180.0, 360.0) - 180.0  # [-180, 180)
    zone = (np.floor((lon_n + 180.0) / 6.0).astype(int) % 60) + 1
    # Norway: zone 32V covers 3°E–12°E between 56°N and 64°N.
    norway = (lat >= 56.0) & (lat < 64.0) & (lon_n >= 3.0) & (lon_n < 12.0)
    zone = np.where(norway, 32, zone)
    # Svalbard: 72°N–84°N, zones 31X (0–9°E), 33X (9–21°E), 35X (21–33°E), 37X (33–42°E).
    sval = (lat >= 72.0) & (lat <= 84.0)
    zone = np.where(sval & (lon_n >= 0.0) & (lon_n < 9.0), 31, zone)
    zone = np.where(sval & (lon_n >= 9.0) & (lon_n < 21.0), 33, zone)
    zone = np.where(sval & (lon_n >= 21.0) & (lon_n < 33.0), 35, zone)
    zone = np.where(sval & (lon_n >= 33.0) & (lon_n < 42.0), 37, zone)
    return zone, lat >= 0.0


@lru_cache(maxsize=256)
def utm_grid(zone: int, north: bool, *, frame_epsg: int) -> GridCRS:
    """UTM zone ``zone`` on the datum and ellipsoid of geographic frame ``frame_epsg``.

    The EPSG code is reported when PROJ recognises an identical registered CRS (e.g. EPSG:6341
    for NAD83(2011) zone 12N); for ITRF frames there is none and ``epsg`` is None.
    """
    import pyproj
    from pyproj.crs import ProjectedCRS
    from pyproj.crs.coordinate_operation import UTMConversion

    if not 1 <= int(zone) <= 60:
        raise GridError(f"UTM zone must be 1–60, got {zone}.", code="bad_zone")
    base = pyproj.CRS.from_epsg(int(frame_epsg))
    base2d = base.to_2d() if len(base.axis_info) == 3 else base
    name = f"{base.name} / UTM zone {int(zone)}{'N' if north else 'S'}"
    crs = ProjectedCRS(conversion=UTMConversion(str(int(zone)), "N" if north else "S"), geodetic_crs=base2d, name=name)
    epsg = crs.to_epsg(min_confidence=90)
    # Area of use: the zone itself (6° wide, its hemisphere up to UTM's latitude limits 80°S / 84°N);
    # a zone chosen for the points is used as a zone, wherever the datum's EPSG entry is registered.
    cm = -183.0 + 6.0 * int(zone)
    area = (cm - 3.0, 0.0, cm + 3.0, 84.0) if north else (cm - 3.0, -80.0, cm + 3.0, 0.0)
    area_name = f"UTM zone {int(zone)}{'N' if north else 'S'}"
    return GridCRS(crs=crs, epsg=epsg, name=name, unit_to_m=1.0, area=area, area_name=area_name)


def _area_of(crs) -> tuple[tuple[float, float, float, float] | None, str]:
    aou = getattr(crs, "area_of_use", None)
    if aou is None:
        return None, ""
    return (float(aou.west), float(aou.south), float(aou.east), float(aou.north)), str(aou.name or "")


@lru_cache(maxsize=256)
def _epsg_grid(epsg: int) -> GridCRS:
    import pyproj

    try:
        crs = pyproj.CRS.from_epsg(int(epsg))
    except pyproj.exceptions.CRSError as exc:
        raise GridError(f"EPSG:{epsg} is not a known coordinate reference system.", code="unknown_crs") from exc
    if not crs.is_projected:
        raise GridError(f"EPSG:{epsg} ({crs.name}) is not a projected (grid) CRS.", code="not_projected")
    unit = crs.axis_info[0].unit_conversion_factor or 1.0
    area, area_name = _area_of(crs)
    return GridCRS(
        crs=crs,
        epsg=int(epsg),
        name=crs.name,
        unit_to_m=float(unit),
        area=area,
        area_name=area_name,
        unit_name=str(crs.axis_info[0].unit_name or "metre"),
    )


@lru_cache(maxsize=256)
def _same_datum(grid: GridCRS, frame_epsg: int) -> bool:
    import pyproj

    frame = pyproj.CRS.from_epsg(int(frame_epsg))
    g = grid.crs.geodetic_crs
    if frame.datum is not None and g is not None and g.datum is not None:
        return frame.datum == g.datum or frame.datum.name == g.datum.name
    return False


def resolve_grid(grid, *, frame_epsg: int, lat_deg=None, lon_deg=None) -> GridCRS:
    """Turn a grid choice into a :class:`GridCRS` for coordinates in frame ``frame_epsg``.

    Parameters
    ----------
    grid : int, str or GridCRS
        An EPSG code of a projected CRS (``6341``, ``"6341"``, ``"EPSG:6341"``), ``"utm"`` (zone from
        the points' longitude, on the frame's own datum), or a ready :class:`GridCRS`.
    frame_epsg : int
        The geographic frame the coordinates are in.
    lat_deg, lon_deg : array_like, optional
        The points (needed for ``"utm"``; all must fall in one zone).

    Raises
    ------
    GridError
        ``unknown_crs``, ``not_projected``, ``datum_mismatch`` (the grid is defined on another datum:
        transform the coordinates to that datum first — a datum change is never applied silently),
        ``several_zones``.
    """
    if isinstance(grid, GridCRS):
        resolved = grid
    elif isinstance(grid, str) and grid.strip().lower() == "utm":
        if lat_deg is None or lon_deg is None:
            raise GridError("Points are needed to choose the UTM zone.", code="no_points")
        zone, north = utm_zone(lat_deg, lon_deg)
        pairs = set(zip(np.ravel(zone).tolist(), np.ravel(north).tolist(), strict=True))
        if len(pairs) != 1:
            names = ", ".join(f"{z}{'N' if n else 'S'}" for z, n in sorted(pairs))
            raise GridError(f"The points fall in several UTM zones ({names}); choose one grid.", code="several_zones")
        z, n = pairs.pop()
        return utm_grid(int(z), bool(n), frame_epsg=int(frame_epsg))
    else:
        text = str(grid).strip().upper().removeprefix("EPSG:")
        if not text.isdigit():
            raise GridError(f"Grid must be an EPSG code or 'utm', got {grid!r}.", code="unknown_crs")
        resolved = _epsg_grid(int(text))
    if not _same_datum(resolved, frame_epsg):
        import pyproj

        frame = pyproj.CRS.from_epsg(int(frame_epsg))
        raise GridError(
            f"Grid {crs_label(resolved.name, resolved.epsg) if resolved.epsg else resolved.name} is defined on "
            f"{getattr(resolved.crs.geodetic_crs, 'name', resolved.name)}, but the coordinates are in "
            f"{crs_label(frame.name, frame_epsg)}. "
            "Transform them to the grid's datum first, or use 'utm' on the frame's own datum.",
            code="datum_mismatch",
        )
    return resolved


@lru_cache(maxsize=256)
def _transformer(grid: GridCRS):
    import pyproj

    return pyproj.Transformer.from_crs(grid.crs.geodetic_crs, grid.crs, always_xy=True, allow_ballpark=False)


@lru_cache(maxsize=256)
def _proj(grid: GridCRS):
    import pyproj

    return pyproj.Proj(grid.crs)


def point_factors(lat_deg, lon_deg, *, grid: GridCRS):
    """Point scale factor k and meridian convergence γ (degrees, clockwise from true north to grid north).

    Transverse Mercator grids (UTM, most state-plane TM zones) use the analytic Krüger series
    (:func:`tm_factors_kruger`, agreeing with PROJ's ``get_factors`` to 1e-10 in k and 1e-6″ in γ, and
    about five times faster); any other projection uses ``pyproj.Proj.get_factors``.
    Raises ``GridError(code="not_conformal")`` for projections where the scale depends on direction.
    """
    lat = np.asarray(lat_deg, dtype=float)
    lon = np.asarray(lon_deg, dtype=float)
    lat, lon = np.broadcast_arrays(lat, lon)
    tm = _tm_parameters(grid)
    if tm is not None and np.all(np.abs(lat) < 90.0):
        lon0, k0, ell = tm
        dlon = np.mod(lon - lon0 + 180.0, 360.0) - 180.0
        if np.all(np.abs(dlon) < 60.0):  # well inside the series' domain (Karney 2011, §3)
            # In blocks, so that the temporaries stay in the CPU cache (about 2× faster on 1e6 points).
            flat_lat, flat_lon = lat.ravel(), lon.ravel()
            k: np.ndarray = np.empty(flat_lat.shape)
            gamma: np.ndarray = np.empty(flat_lat.shape)
            for start in range(0, flat_lat.size, _BLOCK):
                sl = slice(start, start + _BLOCK)
                k[sl], gamma[sl] = tm_factors_kruger(flat_lat[sl], flat_lon[sl], lon0_deg=lon0, k0=k0, ellipsoid=ell)
            return k.reshape(lat.shape), gamma.reshape(lat.shape)
    shape = lat.shape
    f = _proj(grid).get_factors(lon.ravel(), lat.ravel(), errcheck=False)
    k = np.asarray(f.meridional_scale, dtype=float).reshape(shape)
    h = np.asarray(f.parallel_scale, dtype=float).reshape(shape)
    gamma = np.asarray(f.meridian_convergence, dtype=float).reshape(shape)
    if not (np.all(np.isfinite(k)) and np.all(np.isfinite(gamma))):
        raise GridError(f"Some points are outside the domain of {grid.name}.", code="outside_grid")
    if np.any(np.abs(k - h) > 1e-9 * np.abs(k)):
        raise GridError(
            f"{grid.name} is not conformal: the scale depends on direction, so no single point scale factor exists.",
            code="not_conformal",
        )
    return k, gamma


def to_grid(lat_deg, lon_deg, *, frame_epsg: int, grid) -> GridCoordinates:
    """Project geographic coordinates of frame ``frame_epsg`` onto a grid, with k and γ.

    Parameters
    ----------
    lat_deg, lon_deg : array_like
        Geodetic coordinates in frame ``frame_epsg`` (degrees).
    frame_epsg : int
        EPSG code of the frame the coordinates are in (its datum must be the grid's datum).
    grid : int, str or GridCRS
        See :func:`resolve_grid`.

    Returns
    -------
    GridCoordinates
        Easting and northing in metres (converted from the CRS's unit if it is not the metre), point
        scale factor and meridian convergence (degrees, clockwise from true north to grid north), and the
        resolved grid.

    Examples
    --------
    >>> g = to_grid(45.2, -110.6, frame_epsg=6319, grid="utm")
    >>> g.grid.epsg, round(float(g.easting_m), 3), round(float(g.northing_m), 3)
    (6341, 531416.247, 5005246.07)
    """
    lat = np.asarray(lat_deg, dtype=float)
    lon = np.asarray(lon_deg, dtype=float)
    lat, lon = np.broadcast_arrays(lat, lon)
    if not (np.all(np.isfinite(lat)) and np.all(np.isfinite(lon))) or np.any(np.abs(lat) > 90.0):
        raise GridError("Latitude and longitude must be finite, latitude within ±90°.", code="not_finite")
    g = resolve_grid(grid, frame_epsg=frame_epsg, lat_deg=lat, lon_deg=lon)
    shape = lat.shape
    x, y = _transformer(g).transform(lon.ravel(), lat.ravel())
    e = np.asarray(x, dtype=float).reshape(shape) * g.unit_to_m
    n = np.asarray(y, dtype=float).reshape(shape) * g.unit_to_m
    if not (np.all(np.isfinite(e)) and np.all(np.isfinite(n))):
        raise GridError(f"Some points are outside the domain of {g.name}.", code="outside_grid")
    k, gamma = point_factors(lat, lon, grid=g)
    return GridCoordinates(e, n, k, gamma, g, tuple(area_of_use_warnings(lat, lon, grid=g, scale_factor=k)))


def outside_area(lat_deg, lon_deg, *, grid: GridCRS):
    """Boolean array: points outside ``grid``'s area of use (False everywhere when it has none).

    The area is PROJ's (EPSG's) area of use of the CRS, a UTM zone's own extent for a UTM grid
    with no EPSG code, or the area stated with a custom grid. Bounds are inclusive; an area whose
    west bound exceeds its east bound crosses the antimeridian.

    >>> g = resolve_grid(6341, frame_epsg=6319)
    >>> bool(outside_area(45.2, -110.6, grid=g)), bool(outside_area(45.2, -117.5, grid=g))
    (False, True)
    """
    lat = np.asarray(lat_deg, dtype=float)
    lon = np.mod(np.asarray(lon_deg, dtype=float) + 180.0, 360.0) - 180.0
    if grid.area is None:
        return np.zeros(np.broadcast(lat, lon).shape, dtype=bool)
    west, south, east, north = grid.area
    in_lat = (lat >= south) & (lat <= north)
    if west <= east:
        in_lon = (lon >= west) & (lon <= east)
    else:  # crosses the antimeridian
        in_lon = (lon >= west) | (lon <= east)
    return ~(in_lat & in_lon)


def area_of_use_warnings(lat_deg, lon_deg, *, grid: GridCRS, scale_factor=None, who: str | None = None) -> list[str]:
    """Sentences for the user when points fall outside ``grid``'s area of use (empty list otherwise).

    ``who`` replaces the sentence's subject ("The point is", "2 of 5 points are") when the caller can name
    the points better (e.g. "The site is").

    Outside its area a projection still computes, but its distortion grows quickly (a transverse
    Mercator ≈ k0 (1 + Δλ² cos²φ / 2) away from its central meridian) and the grid is not the one
    agreed for that place: the figures are not wrong arithmetic, they are the wrong grid.
    """
    out = outside_area(lat_deg, lon_deg, grid=grid)
    if not np.any(out):
        return []
    assert grid.area is not None  # outside_area finds nothing outside a grid without an area
    west, south, east, north = grid.area
    n_out, n_all = int(np.count_nonzero(out)), int(out.size)
    if who is None:
        who = "The point is" if n_all == 1 else f"{n_out} of {n_all} points are"
    k_text = ""
    if scale_factor is not None:
        k = np.asarray(scale_factor, dtype=float).reshape(out.shape)[out]
        worst = float(k[np.argmax(np.abs(k - 1.0))])
        k_text = f" There the point scale factor is {worst:.8f} ({(worst - 1.0) * 1e6:+.0f} ppm)."
    where = f" ({grid.area_name})" if grid.area_name else ""
    return [
        f"{who} outside the area of use of {grid.label}: {_deg_text(south, 'N', 'S')} to "
        f"{_deg_text(north, 'N', 'S')}, {_deg_text(west, 'E', 'W')} to {_deg_text(east, 'E', 'W')}{where}."
        f"{k_text} Grid coordinates and factors outside that area are distorted and not those of the "
        "grid's agreed extent; use the grid that covers the point (e.g. its own UTM zone or the local grid)."
    ]


def native_units(easting_m, northing_m, *, grid: GridCRS) -> dict | None:
    """Easting and northing in feet beside metres, for a grid whose unit is a foot (else None).

    Both feet are given: the international foot (0.3048 m) and the US survey foot (1200/3937 m,
    legacy); ``grid_unit`` names the one the grid is defined in.

    >>> g = resolve_grid(2256, frame_epsg=4269)   # NAD83 / Montana (ft): international feet
    >>> d = native_units(600000.0, 300000.0, grid=g)
    >>> d["grid_unit"], round(d["easting_ft"], 4), round(d["easting_us_ft"], 4)
    ('international foot', 1968503.937, 1968500.0)
    """
    if not grid.in_feet:
        return None
    e = float(easting_m)
    n = float(northing_m)
    label, _, legacy = UNITS[grid.unit_name]
    return {
        "grid_unit": label,
        "grid_unit_legacy": legacy,
        "metres_per_grid_unit": grid.unit_to_m,
        "easting_ft": e / FOOT_M,
        "northing_ft": n / FOOT_M,
        "easting_us_ft": e / US_SURVEY_FOOT_M,
        "northing_us_ft": n / US_SURVEY_FOOT_M,
    }


def _deg_text(value: float, pos: str, neg: str) -> str:
    return f"{abs(value):.2f}°{pos if value >= 0 else neg}"


def from_grid(easting_m, northing_m, *, grid, frame_epsg: int):
    """Grid easting/northing (metres) → latitude, longitude (degrees) in frame ``frame_epsg``.

    ``grid`` is an EPSG code or :class:`GridCRS` whose datum must be that of ``frame_epsg``.

    >>> lat, lon = from_grid(531416.247, 5005246.070, grid=6341, frame_epsg=6319)
    >>> round(float(lat), 8), round(float(lon), 8)
    (45.2, -110.6)
    """
    if isinstance(grid, str) and grid.strip().lower() == "utm":
        raise GridError("Give the grid of input eastings/northings as an EPSG code.", code="unknown_crs")
    g = resolve_grid(grid, frame_epsg=frame_epsg)
    e = np.asarray(easting_m, dtype=float)
    n = np.asarray(northing_m, dtype=float)
    e, n = np.broadcast_arrays(e, n)
    if not (np.all(np.isfinite(e)) and np.all(np.isfinite(n))):
        raise GridError("Easting and northing must be finite.", code="not_finite")
    shape = e.shape
    lon, lat = _transformer(g).transform(e.ravel() / g.unit_to_m, n.ravel() / g.unit_to_m, direction="INVERSE")
    lat = np.asarray(lat, dtype=float).reshape(shape)
    lon = np.asarray(lon, dtype=float).reshape(shape)
    if not (np.all(np.isfinite(lat)) and np.all(np.isfinite(lon))):
        raise GridError(f"Some eastings/northings are outside the domain of {g.name}.", code="outside_grid")
    return lat, lon


# ---------------------------------------------------------------------------------------------
# Analytic transverse Mercator scale and convergence (Karney 2011), an independent check on PROJ
# ---------------------------------------------------------------------------------------------


def _kruger_alpha(n: float) -> tuple[float, ...]:
    """Karney (2011) eq. (35): α1…α6 as series in the third flattening n."""
    n2, n3, n4, n5, n6 = n**2, n**3, n**4, n**5, n**6
    return (
        n / 2 - 2 * n2 / 3 + 5 * n3 / 16 + 41 * n4 / 180 - 127 * n5 / 288 + 7891 * n6 / 37800,
        13 * n2 / 48 - 3 * n3 / 5 + 557 * n4 / 1440 + 281 * n5 / 630 - 1983433 * n6 / 1935360,
        61 * n3 / 240 - 103 * n4 / 140 + 15061 * n5 / 26880 + 167603 * n6 / 181440,
        49561 * n4 / 161280 - 179 * n5 / 168 + 6601661 * n6 / 7257600,
        34729 * n5 / 80640 - 3418889 * n6 / 1995840,
        212378941 * n6 / 319334400,
    )


def tm_factors_kruger(lat_deg, lon_deg, *, lon0_deg: float, k0: float, ellipsoid: Ellipsoid = GRS80):
    """Transverse Mercator point scale factor and convergence by Krüger's series (Karney 2011).

    Parameters
    ----------
    lat_deg, lon_deg : array_like
        Geodetic coordinates, degrees (|λ − λ0| < 90°).
    lon0_deg : float
        Central meridian, degrees.
    k0 : float
        Scale factor on the central meridian.
    ellipsoid : Ellipsoid

    Returns
    -------
    k : ndarray
        Point scale factor.
    gamma_deg : ndarray
        Meridian convergence, degrees, clockwise from true north to grid north (grid azimuth = geodetic
        azimuth − γ).

    Notes
    -----
    With ζ′ = ξ′ + iη′ (eq. 11), the derivative of eq. (10) is
    dζ/dζ′ = 1 + Σ 2jαj cos(2jζ′) = p′ − i q′, evaluated here with complex arithmetic through
    w = exp(2iζ′) (cos 2jζ′ = (wʲ + w⁻ʲ)/2), which needs one complex exponential instead of
    24 real transcendental functions. Then γ″ = atan2(q′, p′) (eq. 27) and
    k″ = (A/a)·|p′ − iq′| (eq. 28).

    Examples
    --------
    >>> k, g = tm_factors_kruger(45.0, 3.0, lon0_deg=3.0, k0=0.9996)
    >>> round(float(k), 10), float(g)
    (0.9996, 0.0)
    """
    phi = np.radians(np.asarray(lat_deg, dtype=float))
    lam = np.radians(np.mod(np.asarray(lon_deg, dtype=float) - lon0_deg + 180.0, 360.0) - 180.0)
    f = ellipsoid.f
    e2 = ellipsoid.e2
    e = np.sqrt(e2)
    n = f / (2.0 - f)
    big_a = ellipsoid.a_m / (1.0 + n) * (1.0 + n**2 / 4.0 + n**4 / 64.0 + n**6 / 256.0)
    alpha = _kruger_alpha(n)
    sphi = np.sin(phi)
    cphi = np.cos(phi)
    tau = sphi / cphi
    sec = 1.0 / cphi  # √(1 + τ²)
    sig = np.sinh(e * np.arctanh(e * sphi))
    taup = tau * np.sqrt(1.0 + sig * sig) - sig * sec  # eqs. (7)–(9)
    cl = np.cos(lam)
    sl = np.sin(lam)
    xip = np.arctan2(taup, cl)  # eq. (11)
    etap = np.arcsinh(sl / np.sqrt(taup * taup + cl * cl))
    w = np.exp(2j * (xip + 1j * etap))
    winv = 1.0 / w
    # Horner: Σ jαj wʲ = w(1α1 + w(2α2 + … w·6α6)), and the same in w⁻¹ (in place: fewer temporaries).
    acc = np.full_like(w, 6 * alpha[5])
    acc_inv = acc.copy()
    for j in range(5, 0, -1):
        acc *= w
        acc += j * alpha[j - 1]
        acc_inv *= winv
        acc_inv += j * alpha[j - 1]
    acc *= w
    acc_inv *= winv
    deriv = acc
    deriv += acc_inv
    deriv += 1.0  # 1 + Σ 2jαj cos(2jζ′)
    p = deriv.real
    q = -deriv.imag
    gamma1 = np.arctan2(taup * sl, np.sqrt(1.0 + taup * taup) * cl)  # eq. (26)
    gamma2 = np.arctan2(q, p)  # eq. (27)
    k1 = np.sqrt(1.0 - e2 * sphi * sphi) * sec / np.sqrt(taup * taup + cl * cl)
    k2 = big_a / ellipsoid.a_m * np.abs(deriv)  # eq. (28)
    return k0 * k1 * k2, np.degrees(gamma1 + gamma2)


@lru_cache(maxsize=256)
def _tm_parameters(grid: GridCRS):
    """(λ0 in degrees, k0, ellipsoid) if ``grid`` is a plain transverse Mercator (EPSG method 9807)
    on Greenwich with angles in degrees; otherwise None (then PROJ's get_factors is used)."""
    crs = grid.crs
    op = getattr(crs, "coordinate_operation", None)
    if op is None or getattr(op, "method_code", None) != "9807":
        return None
    pm = crs.prime_meridian
    if pm is None or pm.longitude != 0.0:
        return None
    params = {p.code: p for p in op.params}
    lon0, k0 = params.get("8802"), params.get("8805")
    if lon0 is None or k0 is None or lon0.unit_name != "degree":
        return None
    ell = crs.ellipsoid
    if ell is None:
        return None
    inv_f = ell.inverse_flattening
    return (
        float(lon0.value),
        float(k0.value),
        Ellipsoid(ell.name, float(ell.semi_major_metre), 1.0 / inv_f if inv_f else 0.0),
    )


# ---------------------------------------------------------------------------------------------
# Elevation and combined factors
# ---------------------------------------------------------------------------------------------


def radius_gaussian_m(lat_deg, ellipsoid: Ellipsoid = GRS80):
    """Gaussian mean radius of curvature √(ρν) at ``lat_deg`` (metres).

    >>> round(float(radius_gaussian_m(45.0)), 3)
    6378101.03
    """
    rho, nu = radii_of_curvature_m(lat_deg, ellipsoid)
    return np.sqrt(rho * nu)


def radius_in_azimuth_m(lat_deg, azimuth_deg, ellipsoid: Ellipsoid = GRS80):
    """Euler's radius of curvature in azimuth α: R_α = ρν / (ν cos²α + ρ sin²α) (metres)."""
    rho, nu = radii_of_curvature_m(lat_deg, ellipsoid)
    a = np.radians(np.asarray(azimuth_deg, dtype=float))
    return rho * nu / (nu * np.cos(a) ** 2 + rho * np.sin(a) ** 2)


def elevation_factor(h_m, *, lat_deg=None, radius_m=None, ellipsoid: Ellipsoid = GRS80):
    """Elevation (height) factor EF = R / (R + h), h the ELLIPSOIDAL height in metres.

    Give either ``radius_m`` (a stated radius, e.g. 6 371 000 m) or ``lat_deg`` (then R = √(ρν)).
    Using orthometric instead of ellipsoidal height errs by N/R (≈ 4.7 ppm for N = 30 m).

    >>> round(float(elevation_factor(500.0, radius_m=6371000.0)), 10)
    0.9999215255
    """
    h = np.asarray(h_m, dtype=float)
    if radius_m is None:
        if lat_deg is None:
            raise ValueError("give lat_deg (Gaussian mean radius) or radius_m")
        r = radius_gaussian_m(lat_deg, ellipsoid)
    else:
        r = np.asarray(radius_m, dtype=float)
    return r / (r + h)


def combined_factor(scale_factor, elevation_factor_):
    """Combined (grid) factor CF = k × EF.

    >>> round(float(combined_factor(0.9999, 0.9999215255)), 10)
    0.9998215333
    """
    return np.asarray(scale_factor, dtype=float) * np.asarray(elevation_factor_, dtype=float)


def grid_distance_m(ground_distance_m, combined_factor_):
    """Grid distance from a horizontal ground distance: grid = ground × CF."""
    return np.asarray(ground_distance_m, dtype=float) * np.asarray(combined_factor_, dtype=float)


def ground_distance_m(grid_distance_m_, combined_factor_):
    """Horizontal ground distance from a grid distance: ground = grid / CF."""
    return np.asarray(grid_distance_m_, dtype=float) / np.asarray(combined_factor_, dtype=float)


def frame_ellipsoid(frame_epsg: int) -> Ellipsoid:
    """The ellipsoid of a frame (convenience re-export for callers of this module)."""
    return ellipsoid_of_epsg(int(frame_epsg))
