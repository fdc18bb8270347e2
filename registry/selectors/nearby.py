"""Nearby marks: which marks lie within a radius of a point, or within a distance of a site polygon.

Two ways to find candidates, one way to decide:

- **PostGIS** (PostgreSQL with the ``geog`` column of migration 0002): a GeoAlchemy2
  statement with ``ST_DWithin`` (radius prefilter through the GiST index) and ``<->``
  (nearest-neighbour order for a ``LIMIT``), executed on Django's own connection.
- **Portable** (SQLite; callable on PostgreSQL too): a latitude/longitude box on the
  indexed search columns, widened until enough marks are found; split in two across the
  antimeridian and opened to all longitudes at a pole.

Either way the result is decided here, identically: exact geodesic distances on the
GRS80 ellipsoid (Karney 2013 through pyproj; WGS 84 gives the same distances to well
under a millimetre), the radius applied exactly, nearest first and ties by code, then
the accuracy filter. Both paths therefore return the same marks in the same order
(``tests/selectors/test_nearby.py`` checks this over random points, poles and the
antimeridian included, on both databases).

Where a mark is: its *search location*, the latitude/longitude of its current published
position (``Mark.search_lat_deg/_lon_deg``, kept by the position services), in that
position's own frame. Frames in use differ by up to a couple of metres (NAD83(2011)
versus ITRF2014 in the demo district: about 1.5 m), which only matters for a mark at
the very edge of the radius. Distances here are for finding marks, not for staking or
computing baselines: use a mark's published position in the job's frame and epoch for
survey work, and verify control in the field.

Filters (all optional):

- ``status``, ``stability``: one value or several (``MarkStatus``, ``Stability``).
- ``intact_visit_within_yr``: the mark has a visit that found it ``intact`` on or after
  ``as_of`` − N years (N × 365.25 days). Only ``intact`` counts; a ``damaged`` visit shows the
  mark was found but damaged, which is not enough to trust it unseen.
- ``frame_epsg``: the mark has a published position in that frame.
- ``accuracy_class_max_m``: the mark has a published position (in ``frame_epsg`` when
  given) whose FGDC horizontal network accuracy, the radius of the 95 % circle from its
  east/north covariance (FGDC-STD-007.2-1998: r95 = K·σmax), is at most that value.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from django.db import connection

from registry.errors import InvalidInput
from registry.geodesy import proximity
from registry.geodesy.accuracy import fgdc_horizontal_95_m
from registry.models import Mark, MarkStatus, Position, PositionState, Stability
from registry.selectors import spatial_sql

#: Largest search radius accepted (m). A registry search wider than this is a listing.
MAX_RADIUS_M = 1_000_000.0
#: Largest distance from a site polygon accepted (m).
MAX_POLYGON_DISTANCE_M = 100_000.0
#: Largest ``limit`` accepted.
MAX_LIMIT = 10_000
#: First box radius of the portable path when a limit is given (m); it grows as needed.
PORTABLE_START_RADIUS_M = 2_000.0
#: Below this distance the azimuth is not meaningful and is reported as None (m).
AZIMUTH_MIN_DISTANCE_M = 0.001

PATH_AUTO = "auto"
PATH_POSTGIS = "postgis"
PATH_PORTABLE = "portable"
PATHS = (PATH_AUTO, PATH_POSTGIS, PATH_PORTABLE)

#: What the search point and the marks' coordinates are (for pages, API, command).
SEARCH_LOCATION_NOTE = (
    "Search point taken as given (latitude/longitude, decimal degrees, read as WGS 84 / ITRF-aligned). "
    "Each mark is placed at its search location: its current published position, in that position's own "
    "frame (frames in use differ by up to about 2 m). Distances and azimuths are geodesic on the GRS80 "
    "ellipsoid (WGS 84 gives the same to well under 1 mm)."
)
#: The usual cautions, shown with every nearby list.
CAUTIONS = (
    "Distances here are for finding marks, not for staking or computing baselines: use the mark's published "
    "position in the job's frame and epoch.",
    "Recover and verify every mark in the field before relying on it (check its marking as inscribed, its state and a "
    "check shot to another trusted mark); a mark can be disturbed since its last visit.",
    "Local codes and licensed surveying practice govern the use of control.",
)

#: Sphere/ellipsoid factors of the PostGIS spherical measures (see ``proximity``).
_SPHERE_LO, _SPHERE_HI = proximity.sphere_distance_factors()


@dataclass(frozen=True)
class NearbyMark:
    """A mark found by a nearby search.

    Attributes
    ----------
    mark : Mark
    distance_m : float
        Geodesic distance on GRS80 from the search point (or from the site polygon; 0
        inside it) to the mark's search location.
    azimuth_deg : float or None
        Geodetic azimuth (clockwise from north, [0, 360)) at the search point toward the
        mark (for a polygon: from the nearest boundary point). None when the distance is
        under 1 mm or the mark lies inside the polygon.
    """

    mark: Mark
    distance_m: float
    azimuth_deg: float | None

    @property
    def code(self) -> str:
        return self.mark.code

    @property
    def lat_deg(self) -> float:
        return self.mark.search_lat_deg

    @property
    def lon_deg(self) -> float:
        return self.mark.search_lon_deg

    def as_dict(self) -> dict[str, Any]:
        """Plain values for JSON: metres to 3 decimals, degrees to 9 (lat/lon) and 6 (azimuth)."""
        mark = self.mark
        return {
            "code": mark.code,
            "name": mark.name,
            "status": mark.status,
            "stability": mark.stability,
            "monument": mark.monument,
            "lat_deg": round(mark.search_lat_deg, 9),
            "lon_deg": round(mark.search_lon_deg, 9),
            "distance_m": round(self.distance_m, 3),
            "azimuth_deg": None if self.azimuth_deg is None else round(self.azimuth_deg, 6),
        }


@dataclass(frozen=True)
class _Filters:
    shape: spatial_sql.FilterShape
    frame_epsg: int | None
    visit_cutoff: dt.date | None
    accuracy_max_m: float | None


# ----------------------------------------------------------------------------- validation


def _number(name: str, value: Any, *, lo: float, hi: float, lo_open: bool = False) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise InvalidInput(f"{name} must be a number.", code="invalid_number", details={"field": name}) from None
    if not math.isfinite(x) or x > hi or x < lo or (lo_open and x == lo):
        bound = f"greater than {lo:g}" if lo_open else f"at least {lo:g}"
        raise InvalidInput(
            f"{name} must be {bound} and at most {hi:g}.", code="out_of_range", details={"field": name, "value": value}
        )
    return x


def _choices(name: str, values: str | Sequence[str] | None, allowed) -> tuple[str, ...] | None:
    values = spatial_sql.normalise_choices(values)
    if values is None:
        return None
    bad = [v for v in values if v not in allowed.values]
    if bad or not values:
        raise InvalidInput(
            f"{name} must be one or more of: {', '.join(allowed.values)}.",
            code="invalid_choice",
            details={"field": name, "invalid": bad},
        )
    return values


def _filters(
    *,
    status,
    stability,
    intact_visit_within_yr,
    frame_epsg,
    accuracy_class_max_m,
    as_of: dt.date | None,
) -> _Filters:
    statuses = _choices("status", status, MarkStatus)
    stabilities = _choices("stability", stability, Stability)
    cutoff = None
    if intact_visit_within_yr is not None:
        years = _number("intact_visit_within_yr", intact_visit_within_yr, lo=0.0, hi=200.0, lo_open=True)
        today = as_of or dt.datetime.now(dt.UTC).date()
        cutoff = today - dt.timedelta(days=math.floor(years * 365.25))
    if frame_epsg is not None:
        try:
            frame_epsg = int(frame_epsg)
        except (TypeError, ValueError):
            raise InvalidInput(
                "frame_epsg must be an EPSG code (integer).", code="invalid_number", details={"field": "frame_epsg"}
            ) from None
        if not 1024 <= frame_epsg <= 32767 and not 100000 <= frame_epsg <= 999999:
            raise InvalidInput(
                "frame_epsg is not a plausible EPSG code.", code="out_of_range", details={"field": "frame_epsg"}
            )
    accuracy = None
    if accuracy_class_max_m is not None:
        accuracy = _number("accuracy_class_max_m", accuracy_class_max_m, lo=0.0, hi=100.0, lo_open=True)
    shape = spatial_sql.FilterShape(
        statuses=statuses,
        stabilities=stabilities,
        frame=frame_epsg is not None,
        needs_published=accuracy is not None,
        intact_visit=cutoff is not None,
    )
    return _Filters(shape, frame_epsg, cutoff, accuracy)


def _resolve_path(path: str) -> str:
    if path not in PATHS:
        raise InvalidInput(f"path must be one of {', '.join(PATHS)}.", code="invalid_choice", details={"field": "path"})
    if path == PATH_AUTO:
        return PATH_POSTGIS if connection.vendor == "postgresql" else PATH_PORTABLE
    if path == PATH_POSTGIS and connection.vendor != "postgresql":
        raise InvalidInput("The PostGIS path needs PostgreSQL with PostGIS.", code="postgis_unavailable")
    return path


# ----------------------------------------------------------------------------- accuracy


def _accuracy_ok(mark_ids: np.ndarray, filters: _Filters) -> np.ndarray:
    """Which marks have a published position (in the frame, if given) with r95 ≤ the limit."""
    if filters.accuracy_max_m is None or mark_ids.size == 0:
        return np.ones(mark_ids.size, dtype=bool)
    qs = Position.objects.filter(state=PositionState.PUBLISHED)
    if filters.frame_epsg is not None:
        qs = qs.filter(frame_epsg=filters.frame_epsg)
    ids = [int(i) for i in mark_ids]
    rows = []
    for start in range(0, len(ids), 500):  # SQLite limits the number of parameters
        chunk = qs.filter(mark_id__in=ids[start : start + 500])
        rows.extend(chunk.values_list("mark_id", "cov_ee_m2", "cov_en_m2", "cov_nn_m2"))
    if not rows:
        return np.zeros(mark_ids.size, dtype=bool)
    pos_mark, ee, en, nn = (np.asarray(c) for c in zip(*rows, strict=True))
    r95_m = np.asarray(fgdc_horizontal_95_m(ee, en, nn), dtype=float)
    good = set(pos_mark[r95_m <= filters.accuracy_max_m].tolist())
    return np.fromiter((int(i) in good for i in mark_ids), dtype=bool, count=mark_ids.size)


# ----------------------------------------------------------------------------- deciding


@dataclass
class _Decided:
    """Candidates that passed everything, sorted nearest first (ties by code)."""

    ids: np.ndarray
    codes: list[str]
    lat_deg: np.ndarray
    lon_deg: np.ndarray
    distance_m: np.ndarray
    azimuth_deg: np.ndarray
    #: The whole mark row of each, when the candidate query brought it (PostGIS path).
    mark_rows: list[tuple] | None = None

    def __len__(self) -> int:
        return len(self.codes)


def _decide(
    rows: spatial_sql.CandidateRows, lat_deg: float, lon_deg: float, radius_m: float, filters: _Filters
) -> _Decided:
    dist_m, az_deg = proximity.geodesic_inverse(lat_deg, lon_deg, rows.lat_deg, rows.lon_deg)
    return _decide_with(rows, dist_m, az_deg, radius_m, filters)


def _decide_with(rows, dist_m, az_deg, radius_m, filters) -> _Decided:
    keep = np.nonzero(dist_m <= radius_m)[0]
    ids = rows.ids[keep]
    ok = _accuracy_ok(ids, filters)
    keep = keep[ok]
    codes = [rows.codes[i] for i in keep]
    d = dist_m[keep]
    order = np.lexsort((np.asarray(codes, dtype=str), d)) if len(codes) else np.zeros(0, dtype=int)
    return _Decided(
        ids=rows.ids[keep][order],
        codes=[codes[i] for i in order],
        lat_deg=rows.lat_deg[keep][order],
        lon_deg=rows.lon_deg[keep][order],
        distance_m=d[order],
        azimuth_deg=az_deg[keep][order],
        mark_rows=None if rows.extra is None else [rows.extra[i] for i in keep[order]],
    )


def _marks_by_id(ids: list[int]) -> dict[int, Mark]:
    """Mark instances by primary key, in one query.

    A raw queryset over all concrete columns (Django applies its converters, e.g. aware
    datetimes on SQLite), cheaper than ``in_bulk`` because no ORM query is built per
    search; it is most of the time of a search otherwise.
    """
    if not ids:
        return {}
    columns = ", ".join(connection.ops.quote_name(f.column) for f in Mark._meta.concrete_fields)
    table = connection.ops.quote_name(Mark._meta.db_table)
    pk = connection.ops.quote_name(Mark._meta.pk.column)
    if connection.vendor == "postgresql":
        sql = f"SELECT {columns} FROM {table} WHERE {pk} = ANY(%s)"
        return {m.pk: m for m in Mark.objects.raw(sql, [ids])}
    out: dict[int, Mark] = {}
    for start in range(0, len(ids), 500):  # SQLite limits the number of parameters
        chunk = ids[start : start + 500]
        sql = f"SELECT {columns} FROM {table} WHERE {pk} IN ({', '.join(['%s'] * len(chunk))})"
        out.update((m.pk, m) for m in Mark.objects.raw(sql, chunk))
    return out


def _mark_columns() -> tuple[str, ...]:
    return tuple(f.column for f in Mark._meta.concrete_fields)


def _marks_from_rows(rows: list[tuple]) -> dict[int, Mark]:
    """Mark instances from whole rows, through Django's own converters for each column
    (as the ORM applies them: backend converters, then the field's)."""
    fields = Mark._meta.concrete_fields
    table = Mark._meta.db_table
    converters = []
    for i, f in enumerate(fields):
        col = f.get_col(table)
        convs = connection.ops.get_db_converters(col) + col.get_db_converters(connection)
        if convs:
            converters.append((i, col, convs))
    names = [f.attname for f in fields]
    out = {}
    for row in rows:
        values = list(row)
        for i, col, convs in converters:
            for conv in convs:
                values[i] = conv(values[i], col, connection)
        mark = Mark.from_db(connection.alias, names, values)
        out[mark.pk] = mark
    return out


def _materialise(decided: _Decided, limit: int | None) -> list[NearbyMark]:
    n = len(decided) if limit is None else min(limit, len(decided))
    ids = [int(i) for i in decided.ids[:n]]
    marks = _marks_by_id(ids) if decided.mark_rows is None else _marks_from_rows(decided.mark_rows[:n])
    out = []
    for i in range(n):
        d = float(decided.distance_m[i])
        az = float(decided.azimuth_deg[i])
        hidden = d < AZIMUTH_MIN_DISTANCE_M or not math.isfinite(az)
        out.append(NearbyMark(mark=marks[ids[i]], distance_m=d, azimuth_deg=None if hidden else az))
    return out


# ----------------------------------------------------------------------------- candidate paths


def _postgis_decided(lat_deg, lon_deg, radius_m, limit, filters: _Filters) -> _Decided:
    """PostGIS path: KNN candidates, widened until the limit is provably complete."""
    shape = filters.shape
    base = spatial_sql.filter_params(
        shape, frame_epsg=filters.frame_epsg, visit_cutoff=filters.visit_cutoff, vendor="postgresql"
    )
    # Any mark within radius_m on the ellipsoid is within radius_m / lo on the sphere; +1 m for rounding.
    prefilter_m = radius_m / _SPHERE_LO + 1.0
    extra = _mark_columns()
    sql, fixed = spatial_sql.postgis_candidates_sql(shape, limit is not None, extra)
    params = {**fixed, **base, "lat": lat_deg, "lon": lon_deg, "prefilter_m": prefilter_m}
    if limit is None:
        rows = spatial_sql.run_candidates(connection, sql, params, with_sphere=True, n_extra=len(extra))
        return _decide(rows, lat_deg, lon_deg, radius_m, filters)
    k = max(2 * limit + 16, 64)
    while True:
        rows = spatial_sql.run_candidates(connection, sql, {**params, "k": k}, with_sphere=True, n_extra=len(extra))
        decided = _decide(rows, lat_deg, lon_deg, radius_m, filters)
        if len(rows) < k:
            return decided  # every mark inside the prefilter radius was seen
        # Unseen marks are at least as far on the sphere as the farthest row, so at least
        # lo × that on the ellipsoid; stop when the limit-th mark is strictly nearer.
        assert rows.sphere_m is not None  # asked for with_sphere=True
        if len(decided) >= limit and decided.distance_m[limit - 1] < float(rows.sphere_m.max()) * _SPHERE_LO:
            return decided
        k *= 4


def _box_rows(lat_deg, lon_deg, box_radius_m, filters: _Filters, vendor: str) -> spatial_sql.CandidateRows:
    box = proximity.search_box(lat_deg, lon_deg, box_radius_m)
    ranges = () if box.all_longitudes else box.lon_ranges_deg
    sql, fixed = spatial_sql.box_candidates_sql(filters.shape, len(ranges), vendor)
    params = {**fixed, "lat_min": box.lat_min_deg, "lat_max": box.lat_max_deg}
    for i, (lo, hi) in enumerate(ranges):
        params[f"lon_min_{i}"] = lo
        params[f"lon_max_{i}"] = hi
    params.update(
        spatial_sql.filter_params(
            filters.shape, frame_epsg=filters.frame_epsg, visit_cutoff=filters.visit_cutoff, vendor=vendor
        )
    )
    return spatial_sql.run_candidates(connection, sql, params, with_sphere=False)


def _portable_decided(lat_deg, lon_deg, radius_m, limit, filters: _Filters) -> _Decided:
    """Portable path: a box on latitude/longitude, widened until the limit is provably complete."""
    vendor = connection.vendor
    if limit is None:
        return _decide(_box_rows(lat_deg, lon_deg, radius_m, filters, vendor), lat_deg, lon_deg, radius_m, filters)
    rho_m = min(radius_m, PORTABLE_START_RADIUS_M)
    while True:
        rows = _box_rows(lat_deg, lon_deg, rho_m, filters, vendor)
        decided = _decide(rows, lat_deg, lon_deg, rho_m, filters)
        # The box holds every mark within rho, so `limit` marks within rho are the nearest.
        if len(decided) >= limit or rho_m >= radius_m:
            return decided
        # Grow as if marks were spread evenly (area ∝ rho²), at least ×2, at most ×8.
        factor = 8.0 if len(decided) == 0 else min(8.0, max(2.0, math.sqrt(1.5 * limit / len(decided))))
        rho_m = min(radius_m, rho_m * factor)


# ----------------------------------------------------------------------------- public selectors


def marks_near(
    *,
    lat_deg: float,
    lon_deg: float,
    radius_m: float,
    limit: int | None = None,
    status: str | Sequence[str] | None = None,
    intact_visit_within_yr: float | None = None,
    frame_epsg: int | None = None,
    accuracy_class_max_m: float | None = None,
    stability: str | Sequence[str] | None = None,
    as_of: dt.date | None = None,
    path: str = PATH_AUTO,
) -> list[NearbyMark]:
    """Marks within ``radius_m`` of a point, nearest first (ties by code).

    Parameters
    ----------
    lat_deg, lon_deg : float
        Search point (degrees). Taken as given, in any modern ITRF-aligned or plate-fixed
        frame: the search compares it with each mark's search location (module docstring).
    radius_m : float
        Geodesic radius on GRS80 (m), 0 < radius ≤ 1 000 km.
    limit : int, optional
        At most this many marks (the nearest ones).
    status, stability, intact_visit_within_yr, frame_epsg, accuracy_class_max_m
        Filters (module docstring).
    as_of : date, optional
        Reference date for ``intact_visit_within_yr`` (default: today, UTC).
    path : {"auto", "postgis", "portable"}
        Candidate search. "auto": PostGIS on PostgreSQL, the portable box elsewhere.

    Returns
    -------
    list of NearbyMark

    Raises
    ------
    registry.errors.InvalidInput
        With a ``code`` (``out_of_range``, ``invalid_number``, ``invalid_choice``,
        ``postgis_unavailable``); nothing is read.
    """
    lat = _number("lat_deg", lat_deg, lo=-90.0, hi=90.0)
    lon = _number("lon_deg", lon_deg, lo=-180.0, hi=180.0)
    radius = _number("radius_m", radius_m, lo=0.0, hi=MAX_RADIUS_M, lo_open=True)
    n = None if limit is None else int(_number("limit", limit, lo=1, hi=MAX_LIMIT))
    filters = _filters(
        status=status,
        stability=stability,
        intact_visit_within_yr=intact_visit_within_yr,
        frame_epsg=frame_epsg,
        accuracy_class_max_m=accuracy_class_max_m,
        as_of=as_of,
    )
    chosen = _resolve_path(path)
    finder = _postgis_decided if chosen == PATH_POSTGIS else _portable_decided
    return _materialise(finder(lat, lon, radius, n, filters), n)


def marks_near_polygon(
    *,
    polygon_geojson: dict | str,
    distance_m: float,
    limit: int | None = None,
    status: str | Sequence[str] | None = None,
    intact_visit_within_yr: float | None = None,
    frame_epsg: int | None = None,
    accuracy_class_max_m: float | None = None,
    stability: str | Sequence[str] | None = None,
    as_of: dt.date | None = None,
    path: str = PATH_AUTO,
) -> list[NearbyMark]:
    """Marks within ``distance_m`` of a site polygon (inside counts as 0), nearest first.

    Parameters
    ----------
    polygon_geojson : dict or str
        A GeoJSON Polygon (or a Feature holding one), longitude first (RFC 7946); holes
        allowed; at most 200 km across.
    distance_m : float
        Geodesic distance from the polygon (m), 0 ≤ distance ≤ 100 km.

    Other parameters as for ``marks_near``. Edges are treated as geodesics
    (``registry.geodesy.proximity``).
    """
    from registry.jsonlimits import JSONLimitError, loads_checked

    if isinstance(polygon_geojson, str):
        try:
            polygon_geojson = loads_checked(polygon_geojson)
        except JSONLimitError as exc:
            raise InvalidInput(f"The site is not usable: {exc.message}", code=exc.code) from None
        except ValueError:
            raise InvalidInput("The site is not valid JSON.", code="polygon_json") from None
    try:
        polygon = proximity.parse_site_polygon(polygon_geojson)
    except proximity.PolygonError as exc:
        raise InvalidInput(exc.message, code=exc.code) from None
    dist_limit = _number("distance_m", distance_m, lo=0.0, hi=MAX_POLYGON_DISTANCE_M)
    n = None if limit is None else int(_number("limit", limit, lo=1, hi=MAX_LIMIT))
    filters = _filters(
        status=status,
        stability=stability,
        intact_visit_within_yr=intact_visit_within_yr,
        frame_epsg=frame_epsg,
        accuracy_class_max_m=accuracy_class_max_m,
        as_of=as_of,
    )
    chosen = _resolve_path(path)
    # Everything within dist_limit of the polygon is within (enclosing radius + dist_limit)
    # of its centre; 0.1 % + 1 m more covers the geodesic edges' bulge beyond the vertices.
    reach_m = (polygon.enclosing_radius_m + dist_limit) * 1.001 + 1.0
    no_accuracy = _Filters(filters.shape, filters.frame_epsg, filters.visit_cutoff, None)
    finder = _postgis_decided if chosen == PATH_POSTGIS else _portable_decided
    around = finder(polygon.centre_lat_deg, polygon.centre_lon_deg, reach_m, None, no_accuracy)
    if not len(around):
        return []
    dist_poly_m, az_deg = proximity.distance_to_polygon_m(polygon, around.lat_deg, around.lon_deg)
    rows = spatial_sql.CandidateRows(around.ids, around.codes, around.lat_deg, around.lon_deg, extra=around.mark_rows)
    decided = _decide_with(rows, dist_poly_m, az_deg, dist_limit, filters)
    return _materialise(decided, n)
