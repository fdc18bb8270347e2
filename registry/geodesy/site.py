"""Job sites: GeoJSON parsing, a local plane, and the evaluation grid over a polygon.

A job's site is a GeoJSON ``Point`` or ``Polygon`` (RFC 7946: longitude, latitude
[, height], decimal degrees). Screening needs distances from up to thousands of
candidate marks to thousands of site points, which is too many for geodesic
inverses (about 0.5 µs each in pyproj; 10⁷ pairs ≈ 5 s). So site and candidates
are projected onto a local transverse Mercator plane with scale 1 on its central
meridian and origin at the site's reference point, and distances are planar.

Accuracy of planar distances: on a transverse Mercator projection the point scale
at distance x from the central meridian is k ≈ 1 + x²/(2R²) (Snyder 1987, *Map
Projections — A Working Manual*, USGS Prof. Paper 1395, eq. 8-7 with k0 = 1), so a
line whose ends lie within 20 km of the central meridian has a relative length error
below (20 km)²/(2·6371 km²) ≈ 4.9e-6. ``tests/geodesy/test_site.py`` checks planar
distances against pyproj's geodesic inverse (Karney 2013, *J. Geodesy* 87:43–55)
to < 1e-5 relative inside 20 km, well inside the 1e-4 the screening needs (an RTK
error of 1 ppm changes by 1e-4·1 ppm — nothing — for such a relative distance error).

Site coordinates are taken as latitude/longitude in the job's frame. RFC 7946 says
WGS 84; the difference between WGS 84 and any modern ITRF-aligned or plate-fixed
frame is at most a couple of metres, which does not change screening results
(1 ppm of 2 m is 2 µm). The *mark* coordinates used for export never pass through
this module.

Polygon grid: cell centres of a square grid inside the polygon (even–odd rule,
holes allowed), with the spacing chosen so that roughly ``target_points`` (default
1,000; always within 400–2,500 for ordinary shapes) centres fall inside, or a fixed
spacing given by the job. Worst-case figures also need the boundary, which cell
centres miss by up to half a cell, so boundary points (vertices and points along the
edges at the grid spacing) are added as *boundary samples*: they count for worst
cases but not for area fractions.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pyproj

from registry.jsonlimits import JSONLimitError, check_json_value, loads_checked

#: Largest site extent accepted (m). A bigger site is not an RTK job for one base.
MAX_SITE_EXTENT_M = 50_000.0
#: Grid-size bounds the automatic spacing aims for (number of cell centres inside).
GRID_MIN_POINTS = 400
GRID_MAX_POINTS = 2_500
GRID_TARGET_POINTS = 1_000
#: A job's fixed grid spacing may not produce more cell centres than this.
GRID_HARD_LIMIT_POINTS = 250_000


class SiteError(ValueError):
    """A site that cannot be used; ``code`` is machine readable, the message plain words."""

    def __init__(self, message: str, *, code: str):
        super().__init__(message)
        self.code = code
        self.message = message


@dataclass(frozen=True)
class Site:
    """A parsed job site.

    Attributes
    ----------
    kind : str
        ``"point"`` or ``"polygon"``.
    rings_lonlat_deg : list of ndarray
        For a polygon: the exterior ring first, then holes; each an (n, 2) array of
        longitude, latitude in degrees, closed (first == last). For a point: one (1, 2) array.
    ref_lat_deg, ref_lon_deg : float
        Reference point: the point itself, or the polygon's area centroid
        (computed on the local plane of the exterior ring's vertex mean).
    height_m : float or None
        The ellipsoidal height given as a third coordinate of a point site, if any.
    heights_m : tuple of float
        Every ellipsoidal height given as a third coordinate (the point's, or the polygon's
        vertices'; the closing vertex once), in the job's frame; empty when none is given.
    """

    kind: str
    rings_lonlat_deg: list[np.ndarray]
    ref_lat_deg: float
    ref_lon_deg: float
    height_m: float | None = None
    heights_m: tuple[float, ...] = ()

    @property
    def is_point(self) -> bool:
        return self.kind == "point"


@dataclass(frozen=True)
class LocalPlane:
    """A transverse Mercator plane, k0 = 1, centred on (lat0_deg, lon0_deg), on an ellipsoid.

    Examples
    --------
    >>> plane = LocalPlane(45.2, -110.6)
    >>> e, n = plane.to_local_m(45.2, -110.6)
    >>> float(e), float(n)
    (0.0, 0.0)
    """

    lat0_deg: float
    lon0_deg: float
    ellps: str = "GRS80"
    _proj: Any = field(default=None, init=False, repr=False, compare=False)

    def __post_init__(self):
        proj = pyproj.Proj(
            proj="tmerc", lat_0=self.lat0_deg, lon_0=self.lon0_deg, k=1.0, x_0=0.0, y_0=0.0, ellps=self.ellps
        )
        object.__setattr__(self, "_proj", proj)

    def to_local_m(self, lat_deg, lon_deg) -> tuple[np.ndarray, np.ndarray]:
        """Project latitude/longitude (degrees) to local east/north (metres)."""
        e_m, n_m = self._proj(np.asarray(lon_deg, dtype=float), np.asarray(lat_deg, dtype=float))
        return np.asarray(e_m, dtype=float), np.asarray(n_m, dtype=float)

    def to_geodetic_deg(self, e_m, n_m) -> tuple[np.ndarray, np.ndarray]:
        """Inverse projection: local east/north (metres) to latitude, longitude (degrees)."""
        lon, lat = self._proj(np.asarray(e_m, dtype=float), np.asarray(n_m, dtype=float), inverse=True)
        return np.asarray(lat, dtype=float), np.asarray(lon, dtype=float)


@dataclass(frozen=True)
class SiteGrid:
    """Evaluation points of a site on a local plane.

    Attributes
    ----------
    e_m, n_m : ndarray
        Local east/north of every evaluation point (cells first, then boundary samples).
    is_cell : ndarray of bool
        True for cell centres (they carry area), False for boundary samples.
    spacing_m : float
        Cell size (0 for a point site).
    area_m2 : float
        Area of the site on the local plane (0 for a point).
    """

    e_m: np.ndarray
    n_m: np.ndarray
    is_cell: np.ndarray
    spacing_m: float
    area_m2: float

    @property
    def n_cells(self) -> int:
        return int(self.is_cell.sum())


# --------------------------------------------------------------------------- parsing


def _number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool) and math.isfinite(value)


def _position(pos: Any, where: str) -> tuple[float, float, float | None]:
    if not isinstance(pos, list | tuple) or len(pos) not in (2, 3) or not all(_number(v) for v in pos):
        raise SiteError(
            f"{where}: a position is [longitude, latitude] or [longitude, latitude, height] in numbers.",
            code="invalid_position",
        )
    lon, lat = float(pos[0]), float(pos[1])
    if not -180.0 <= lon <= 180.0 or not -90.0 <= lat <= 90.0:
        raise SiteError(
            f"{where}: longitude {lon} / latitude {lat} out of range (GeoJSON order is longitude first).",
            code="invalid_position",
        )
    return lon, lat, (float(pos[2]) if len(pos) == 3 else None)


def _segments_cross(p1, p2, q1, q2) -> np.ndarray:
    """Proper crossings between segments p1→p2 (m, 2) and q1→q2 (k, 2); (m, k) bool."""

    def orient(a, b, c):
        return (b[..., 0] - a[..., 0]) * (c[..., 1] - a[..., 1]) - (b[..., 1] - a[..., 1]) * (c[..., 0] - a[..., 0])

    a, b = p1[:, None, :], p2[:, None, :]
    c, d = q1[None, :, :], q2[None, :, :]
    d1, d2 = orient(c, d, a), orient(c, d, b)
    d3, d4 = orient(a, b, c), orient(a, b, d)
    return (d1 * d2 < 0) & (d3 * d4 < 0)


def parse_site_geojson(value: Any) -> Site:
    """Parse and check a job site given as GeoJSON (text or already-decoded object).

    Accepts a ``Point`` or ``Polygon`` geometry, or a ``Feature`` holding one.

    Raises
    ------
    SiteError
        Codes: ``invalid_json``, ``unsupported_geometry``, ``invalid_position``,
        ``ring_not_closed``, ``too_few_positions``, ``self_intersecting``,
        ``zero_area``, ``site_too_large``.

    Examples
    --------
    >>> s = parse_site_geojson('{"type": "Point", "coordinates": [-110.6, 45.2]}')
    >>> s.kind, s.ref_lat_deg, s.ref_lon_deg
    ('point', 45.2, -110.6)
    >>> parse_site_geojson({"type": "LineString", "coordinates": []})
    Traceback (most recent call last):
    ...
    registry.geodesy.site.SiteError: The site must be a GeoJSON Point or Polygon, not LineString.
    """
    try:
        if isinstance(value, str | bytes):
            value = loads_checked(value)
        else:
            check_json_value(value)
    except JSONLimitError as exc:
        raise SiteError(f"The site is not usable: {exc.message}", code=exc.code) from None
    except (ValueError, TypeError) as exc:
        raise SiteError(f"The site is not valid JSON: {exc}.", code="invalid_json") from None
    if not isinstance(value, dict):
        raise SiteError("The site must be a GeoJSON object.", code="unsupported_geometry")
    if value.get("type") == "Feature":
        value = value.get("geometry")
        if not isinstance(value, dict):
            raise SiteError("The site feature has no geometry.", code="unsupported_geometry")
    gtype = value.get("type")
    coords = value.get("coordinates")
    if gtype == "Point":
        lon, lat, h = _position(coords, "Point")
        return Site("point", [np.array([[lon, lat]])], lat, lon, h, () if h is None else (h,))
    if gtype != "Polygon":
        raise SiteError(f"The site must be a GeoJSON Point or Polygon, not {gtype}.", code="unsupported_geometry")
    if not isinstance(coords, list) or not coords:
        raise SiteError("A Polygon needs at least its exterior ring.", code="too_few_positions")
    rings = []
    heights: list[float] = []
    for r_index, ring in enumerate(coords):
        where = "exterior ring" if r_index == 0 else f"hole {r_index}"
        if not isinstance(ring, list) or len(ring) < 4:
            raise SiteError(
                f"The {where} needs at least 4 positions (3 corners and the closing one).", code="too_few_positions"
            )
        parsed = [_position(p, where) for p in ring]
        pts = np.array([q[:2] for q in parsed], dtype=float)
        heights.extend(q[2] for q in parsed[:-1] if q[2] is not None)
        if not np.array_equal(pts[0], pts[-1]):
            raise SiteError(
                f"The {where} is not closed: its last position must repeat the first.", code="ring_not_closed"
            )
        if len(np.unique(pts[:-1], axis=0)) < 3:
            raise SiteError(f"The {where} needs at least 3 distinct corners.", code="too_few_positions")
        rings.append(pts)
    # Everything else on a provisional plane at the vertex mean of the exterior ring.
    lon0, lat0 = rings[0][:-1].mean(axis=0)
    plane = LocalPlane(float(lat0), float(lon0))
    local = [np.column_stack(plane.to_local_m(r[:, 1], r[:, 0])) for r in rings]
    ext = local[0]
    extent = float(np.max(np.ptp(ext, axis=0)))
    if extent > MAX_SITE_EXTENT_M:
        raise SiteError(
            f"The site is {extent / 1000:.1f} km across; single-base RTK screening accepts up to "
            f"{MAX_SITE_EXTENT_M / 1000:.0f} km. Split the job.",
            code="site_too_large",
        )
    area = _ring_area_m2(ext)
    if abs(area) < 1.0:
        raise SiteError("The site polygon has (almost) no area.", code="zero_area")
    seg_a = np.concatenate([r[:-1] for r in local])
    seg_b = np.concatenate([r[1:] for r in local])
    if len(seg_a) <= 2000 and _segments_cross(seg_a, seg_b, seg_a, seg_b).any():
        raise SiteError("The site polygon's edges cross each other.", code="self_intersecting")
    ce, cn = _ring_centroid_m(ext)
    lat_c, lon_c = plane.to_geodetic_deg(ce, cn)
    return Site("polygon", rings, float(lat_c), float(lon_c), None, tuple(heights))


# --------------------------------------------------------------------------- plane geometry


def _ring_area_m2(ring_en_m: np.ndarray) -> float:
    """Signed shoelace area of a closed ring (counter-clockwise positive)."""
    x, y = ring_en_m[:, 0], ring_en_m[:, 1]
    return float(0.5 * np.sum(x[:-1] * y[1:] - x[1:] * y[:-1]))


def _ring_centroid_m(ring_en_m: np.ndarray) -> tuple[float, float]:
    x, y = ring_en_m[:, 0], ring_en_m[:, 1]
    cross = x[:-1] * y[1:] - x[1:] * y[:-1]
    a = cross.sum() / 2.0
    return float(((x[:-1] + x[1:]) * cross).sum() / (6 * a)), float(((y[:-1] + y[1:]) * cross).sum() / (6 * a))


def polygon_area_m2(rings_en_m: list[np.ndarray]) -> float:
    """Area of a polygon with holes (exterior minus holes), m².

    >>> square = np.array([[0, 0], [10, 0], [10, 10], [0, 10], [0, 0]], dtype=float)
    >>> polygon_area_m2([square])
    100.0
    """
    ext = abs(_ring_area_m2(rings_en_m[0]))
    return ext - sum(abs(_ring_area_m2(r)) for r in rings_en_m[1:])


def points_in_polygon(e_m, n_m, rings_en_m: list[np.ndarray]) -> np.ndarray:
    """Even–odd point-in-polygon test, vectorised over points (holes are further rings).

    >>> sq = np.array([[0, 0], [10, 0], [10, 10], [0, 10], [0, 0]], dtype=float)
    >>> points_in_polygon(np.array([5.0, 15.0]), np.array([5.0, 5.0]), [sq]).tolist()
    [True, False]
    """
    e = np.asarray(e_m, dtype=float)
    n = np.asarray(n_m, dtype=float)
    inside = np.zeros(e.shape, dtype=bool)
    for ring in rings_en_m:
        x1, y1 = ring[:-1, 0], ring[:-1, 1]
        x2, y2 = ring[1:, 0], ring[1:, 1]
        for k in range(len(x1)):  # loop over edges, vectorised over points
            if y1[k] == y2[k]:
                continue
            crosses = (y1[k] > n) != (y2[k] > n)
            x_at = x1[k] + (n - y1[k]) * (x2[k] - x1[k]) / (y2[k] - y1[k])
            inside ^= crosses & (e < x_at)
    return inside


def site_plane(site: Site, ellps: str = "GRS80") -> LocalPlane:
    """The local plane of a site (centred on its reference point)."""
    return LocalPlane(site.ref_lat_deg, site.ref_lon_deg, ellps)


def site_rings_m(site: Site, plane: LocalPlane) -> list[np.ndarray]:
    """The site's rings on ``plane`` as (n, 2) east/north arrays in metres."""
    return [np.column_stack(plane.to_local_m(r[:, 1], r[:, 0])) for r in site.rings_lonlat_deg]


def site_radius_m(site: Site, plane: LocalPlane) -> float:
    """Largest distance from the reference point to the site's boundary (0 for a point)."""
    if site.is_point:
        return 0.0
    ext = site_rings_m(site, plane)[0]
    return float(np.max(np.hypot(ext[:, 0], ext[:, 1])))


def auto_spacing_m(area_m2: float, target_points: int = GRID_TARGET_POINTS) -> float:
    """Grid spacing giving about ``target_points`` cells over ``area_m2``.

    >>> auto_spacing_m(1_000_000.0)   # a 1 km² site → about 31.6 m cells
    31.622776601683793
    """
    return math.sqrt(area_m2 / target_points)


def build_site_grid(site: Site, plane: LocalPlane, spacing_m: float | None = None) -> SiteGrid:
    """The evaluation points of ``site`` on ``plane``.

    Parameters
    ----------
    site : Site
    plane : LocalPlane
        Usually ``site_plane(site)``.
    spacing_m : float, optional
        Fixed cell size; empty: chosen so that about 1,000 cell centres fall inside
        (re-tried with a finer spacing when an odd shape leaves fewer than 400).

    Raises
    ------
    SiteError
        ``grid_too_fine`` when a fixed spacing would give more than 250,000 cells.
    """
    if site.is_point:
        e, n = plane.to_local_m(site.ref_lat_deg, site.ref_lon_deg)
        return SiteGrid(np.atleast_1d(e), np.atleast_1d(n), np.array([True]), 0.0, 0.0)
    rings = site_rings_m(site, plane)
    area = polygon_area_m2(rings)
    ext = rings[0]
    lo, hi = ext[:-1].min(axis=0), ext[:-1].max(axis=0)
    fixed = spacing_m is not None
    spacing = float(spacing_m) if spacing_m is not None else auto_spacing_m(area)
    for _attempt in range(6):
        nx = int(math.ceil((hi[0] - lo[0]) / spacing))
        ny = int(math.ceil((hi[1] - lo[1]) / spacing))
        if nx * ny > 4 * GRID_HARD_LIMIT_POINTS:
            raise SiteError(
                f"A grid spacing of {spacing:.1f} m gives too many points for this site; use a larger spacing.",
                code="grid_too_fine",
            )
        # Square cells of the spacing, centred on the bounding box.
        x0 = 0.5 * (lo[0] + hi[0]) - 0.5 * nx * spacing
        y0 = 0.5 * (lo[1] + hi[1]) - 0.5 * ny * spacing
        xs = x0 + (np.arange(nx) + 0.5) * spacing
        ys = y0 + (np.arange(ny) + 0.5) * spacing
        gx, gy = np.meshgrid(xs, ys)
        gx, gy = gx.ravel(), gy.ravel()
        inside = points_in_polygon(gx, gy, rings)
        count = int(inside.sum())
        if fixed or count >= GRID_MIN_POINTS:
            break
        spacing /= math.sqrt(GRID_TARGET_POINTS / max(count, 1))
    if int(inside.sum()) > GRID_HARD_LIMIT_POINTS:
        raise SiteError("The grid spacing is too fine for this site.", code="grid_too_fine")
    cell_e, cell_n = gx[inside], gy[inside]
    # Boundary samples: every vertex, and points along each edge at the grid spacing.
    be, bn = [], []
    for ring in rings:
        for (x1, y1), (x2, y2) in zip(ring[:-1], ring[1:], strict=True):
            steps = max(1, int(math.ceil(math.hypot(x2 - x1, y2 - y1) / spacing)))
            t = np.arange(steps) / steps
            be.append(x1 + t * (x2 - x1))
            bn.append(y1 + t * (y2 - y1))
    e = np.concatenate([cell_e, *be])
    n = np.concatenate([cell_n, *bn])
    is_cell = np.zeros(e.shape, dtype=bool)
    is_cell[: len(cell_e)] = True
    return SiteGrid(e, n, is_cell, float(spacing), area)


def display_utm_zone(lon_deg: float, lat_deg: float) -> tuple[int, bool]:
    """UTM zone number and hemisphere (north=True) for a point; for map display only.

    >>> display_utm_zone(-110.6, 45.2)
    (12, True)
    """
    zone = int(math.floor((lon_deg + 180.0) / 6.0)) % 60 + 1
    return zone, lat_deg >= 0.0


def cells_outline_m(e_m, n_m, spacing_m: float) -> list[list[np.ndarray]]:
    """Outline of a set of square cells of one regular grid, as polygons with holes (local plane, metres).

    Each cell is the square of side ``spacing_m`` centred on (``e_m``, ``n_m``); the centres lie on one
    lattice (as :func:`build_site_grid` makes them). The boundary edges (those with no cell on their
    other side) are chained into closed rings; counter-clockwise rings are exteriors, clockwise rings
    holes, each hole assigned to the exterior that contains it. Collinear vertices are dropped.

    Returns a list of polygons, each ``[exterior, hole, ...]`` with rings as (k, 2) arrays, closed
    (first vertex repeated last).

    >>> polys = cells_outline_m([0.0, 10.0, 0.0], [0.0, 0.0, 10.0], 10.0)
    >>> len(polys), len(polys[0]), polys[0][0].tolist()
    (1, 1, [[15.0, -5.0], [15.0, 5.0], [5.0, 5.0], [5.0, 15.0], [-5.0, 15.0], [-5.0, -5.0], [15.0, -5.0]])
    >>> ring = [(0.0, 0.0), (10.0, 0.0), (20.0, 0.0), (0.0, 10.0), (20.0, 10.0), (0.0, 20.0), (10.0, 20.0), (20.0, 20.0)]
    >>> polys = cells_outline_m([p[0] for p in ring], [p[1] for p in ring], 10.0)
    >>> len(polys), len(polys[0]), polys[0][1][:-1].tolist()
    (1, 2, [[5.0, 5.0], [5.0, 15.0], [15.0, 15.0], [15.0, 5.0]])
    """
    e = np.atleast_1d(np.asarray(e_m, dtype=float))
    n = np.atleast_1d(np.asarray(n_m, dtype=float))
    if e.size == 0 or not spacing_m > 0:
        return []
    e0, n0 = float(e.min()), float(n.min())
    ii = np.rint((e - e0) / spacing_m).astype(np.int64)
    jj = np.rint((n - n0) / spacing_m).astype(np.int64)
    cells = set(zip(ii.tolist(), jj.tolist(), strict=True))
    # Directed boundary edges on the corner lattice (corner (i, j) is the lower-left corner of cell (i, j)),
    # counter-clockwise around each cell, kept only where the neighbour across the edge is missing.
    nxt: dict[tuple[int, int], list[tuple[int, int]]] = {}
    for i, j in cells:
        for (a, b), (c, d), nb in (
            ((i, j), (i + 1, j), (i, j - 1)),
            ((i + 1, j), (i + 1, j + 1), (i + 1, j)),
            ((i + 1, j + 1), (i, j + 1), (i, j + 1)),
            ((i, j + 1), (i, j), (i - 1, j)),
        ):
            if nb not in cells:
                nxt.setdefault((a, b), []).append((c, d))
    rings: list[list[tuple[int, int]]] = []
    while nxt:
        start = next(iter(nxt))
        ring = [start]
        here = start
        while True:
            outs = nxt[here]
            to = outs.pop()
            if not outs:
                del nxt[here]
            if to == start:
                break
            ring.append(to)
            here = to
        rings.append(ring)

    def simplify(ring):
        m = len(ring)
        keep = []
        for k in range(m):
            (ax, ay), (bx, by), (cx, cy) = ring[k - 1], ring[k], ring[(k + 1) % m]
            if (bx - ax) * (cy - by) - (by - ay) * (cx - bx) != 0:
                keep.append(ring[k])
        return keep

    def area2(ring):
        return sum(ax * by - bx * ay for (ax, ay), (bx, by) in zip(ring, ring[1:] + ring[:1], strict=True))

    def contains(ring, x, y):
        inside = False
        for (ax, ay), (bx, by) in zip(ring, ring[1:] + ring[:1], strict=True):
            if (ay > y) != (by > y) and x < ax + (y - ay) * (bx - ax) / (by - ay):
                inside = not inside
        return inside

    rings = [simplify(r) for r in rings]
    outer = [r for r in rings if area2(r) > 0]
    holes = [r for r in rings if area2(r) < 0]
    polys: list[list[list[tuple[int, int]]]] = [[r] for r in outer]
    for h in holes:
        # A point just off a corner of the hole lies inside the exterior that encloses the hole.
        x, y = h[0][0] + 1e-3, h[0][1] + 1e-3
        for poly in sorted(polys, key=lambda p: area2(p[0])):
            if contains(poly[0], x, y):
                poly.append(h)
                break

    def to_m(ring):
        arr = np.array(ring + ring[:1], dtype=float)
        return np.column_stack([e0 + (arr[:, 0] - 0.5) * spacing_m, n0 + (arr[:, 1] - 0.5) * spacing_m])

    return [[to_m(r) for r in poly] for poly in polys]
