"""SQLAlchemy (GeoAlchemy2) statements for the nearby-mark search, run on Django's own connection.

Two candidate statements share one set of filter clauses:

- ``postgis_candidates_sql``: PostgreSQL + PostGIS. ``ST_DWithin`` on the generated
  ``registry_mark.geog`` column (migration 0002; not a Django field) prefilters by radius
  through the GiST index, and ``<->`` orders by (spherical) distance so that a ``LIMIT``
  picks the nearest candidates.
- ``box_candidates_sql``: any database (SQLite, and PostgreSQL when asked). A latitude/
  longitude box (one or two longitude ranges) on the indexed search latitude/longitude.

Statements are compiled with the connection's dialect into ``%(name)s`` placeholders and
executed with ``django.db.connection.cursor()``, so they run inside the caller's
transaction (a test's transaction, a request that has just written a mark). The compiled
text depends only on the *shape* of the query (which filters are present, which enum
values), so it is cached per shape; values travel as parameters.

Nothing here decides which marks qualify: rows are candidates. The exact ellipsoidal
distances, the radius, the accuracy class and the order are applied in
``registry.selectors.nearby``.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

import numpy as np
from geoalchemy2 import Geography
from sqlalchemy import (
    BigInteger,
    Column,
    Date,
    Float,
    Integer,
    MetaData,
    String,
    Table,
    and_,
    bindparam,
    cast,
    exists,
    func,
    literal_column,
    or_,
    select,
)
from sqlalchemy.dialects import postgresql, sqlite
from sqlalchemy.sql.elements import ColumnElement, Label

metadata = MetaData()

#: Only the columns the search needs. ``geog`` exists on PostgreSQL only.
mark_table = Table(
    "registry_mark",
    metadata,
    Column("id", BigInteger, primary_key=True),
    Column("code", String(32)),
    Column("status", String(10)),
    Column("stability", String(10)),
    Column("search_lat_deg", Float),
    Column("search_lon_deg", Float),
    Column("geog", Geography(geometry_type="POINT", srid=4326, spatial_index=False)),
)
position_table = Table(
    "registry_position",
    metadata,
    Column("id", BigInteger, primary_key=True),
    Column("mark_id", BigInteger),
    Column("frame_epsg", Integer),
    Column("state", String(10)),
)
visit_table = Table(
    "registry_visit",
    metadata,
    Column("id", BigInteger, primary_key=True),
    Column("mark_id", BigInteger),
    Column("finding", String(20)),
    Column("visited_on", Date),
)

_DIALECTS = {
    "postgresql": postgresql.psycopg.dialect(paramstyle="pyformat"),
    "sqlite": sqlite.pysqlite.dialect(paramstyle="pyformat"),
}


@dataclass(frozen=True)
class FilterShape:
    """The SQL-side filters (hashable, so compiled statements can be cached per shape).

    ``needs_published`` asks for at least one published position (in ``frame``, when
    a frame is given); the accuracy class itself is checked in Python.
    """

    statuses: tuple[str, ...] | None = None
    stabilities: tuple[str, ...] | None = None
    frame: bool = False
    needs_published: bool = False
    intact_visit: bool = False


@dataclass(frozen=True)
class CandidateRows:
    """Candidate marks: ids, codes, search latitude/longitude (degrees), and, on the
    PostGIS path, the spherical distance used for ordering (m)."""

    ids: np.ndarray
    codes: list[str]
    lat_deg: np.ndarray
    lon_deg: np.ndarray
    sphere_m: np.ndarray | None = None
    #: Per row, the values of the extra columns asked for (the whole mark), or None.
    extra: list[tuple] | None = None

    def __len__(self) -> int:
        return len(self.codes)


def _filter_clauses(shape: FilterShape) -> list:
    m = mark_table
    clauses: list[ColumnElement[bool]] = []
    if shape.statuses is not None:
        clauses.append(m.c.status.in_(list(shape.statuses)))
    if shape.stabilities is not None:
        clauses.append(m.c.stability.in_(list(shape.stabilities)))
    if shape.frame or shape.needs_published:
        p = position_table
        cond = [p.c.mark_id == m.c.id, p.c.state == "published"]
        if shape.frame:
            cond.append(p.c.frame_epsg == bindparam("frame_epsg", value=0, type_=Integer))
        clauses.append(exists(select(p.c.id).where(and_(*cond))))
    if shape.intact_visit:
        v = visit_table
        clauses.append(
            exists(
                select(v.c.id).where(
                    and_(
                        v.c.mark_id == m.c.id,
                        v.c.finding == "intact",
                        v.c.visited_on >= bindparam("visit_cutoff", value=dt.date(1900, 1, 1), type_=Date),
                    )
                )
            )
        )
    return clauses


def _compile(stmt, vendor: str) -> tuple[str, dict]:
    # Every bindparam carries a placeholder value (render_postcompile needs one); the
    # caller replaces them with the real values of each search.
    compiled = stmt.compile(dialect=_DIALECTS[vendor], compile_kwargs={"render_postcompile": True})
    return str(compiled), dict(compiled.params)


def _search_point():
    point = func.ST_SetSRID(
        func.ST_MakePoint(bindparam("lon", value=0.0, type_=Float), bindparam("lat", value=0.0, type_=Float)), 4326
    )
    return cast(point, Geography(geometry_type="POINT", srid=4326, spatial_index=False))


@lru_cache(maxsize=256)
def postgis_candidates_sql(shape: FilterShape, limited: bool, extra_columns: tuple[str, ...] = ()) -> tuple[str, dict]:
    """PostgreSQL text of the PostGIS candidate query and the shape's fixed parameters.

    ``extra_columns`` (column names of ``registry_mark``) are returned after the five
    candidate columns, so that the marks come back with their candidates in one round trip.

    Parameters to add: ``lat``, ``lon`` (degrees), ``prefilter_m`` (spherical radius, m),
    ``k`` (row limit, when ``limited``), ``frame_epsg`` and ``visit_cutoff`` when the
    shape uses them.

    ``ST_DWithin(geog, point, r, false)`` measures on the sphere: the caller widens the
    radius by the sphere/ellipsoid bound (``proximity.sphere_distance_factors``). The
    ``<->`` operator on geography is also a spherical distance (PostGIS manual,
    "<->"), returned as the last column so the caller can bound unseen marks.

    Without a limit: ``ST_DWithin`` in the WHERE clause (bitmap scan of the GiST index).
    With a limit: an inner query takes the ``k`` nearest by ``<->`` among the marks whose
    index box meets the radius's box (``geog && _ST_Expand(point, r)``, the index test
    that ``ST_DWithin`` itself uses), and the outer query applies ``ST_DWithin``. The
    split matters: PostgreSQL underestimates how many rows ``ST_DWithin`` keeps and, given
    it in the same query as ``ORDER BY ... LIMIT``, sorts every row in the radius (measured
    at 1,000,000 marks: tens of milliseconds) instead of walking the index in distance
    order (about a millisecond). The box keeps the walk bounded when filters reject most
    marks.
    """
    m = mark_table
    point = _search_point()
    prefilter = bindparam("prefilter_m", value=0.0, type_=Float)
    knn = m.c.geog.op("<->", return_type=Float)(point)
    columns = (m.c.id, m.c.code, m.c.search_lat_deg, m.c.search_lon_deg)
    extra: list[Label[Any]] = [literal_column(f'registry_mark."{name}"').label(f"x_{name}") for name in extra_columns]
    if not limited:
        stmt = select(*columns, knn.label("sphere_m"), *extra).where(
            func.ST_DWithin(m.c.geog, point, prefilter, False), *_filter_clauses(shape)
        )
        return _compile(stmt, "postgresql")
    expanded = func._ST_Expand(point, prefilter, type_=m.c.geog.type)
    inner = (
        select(*columns, m.c.geog, knn.label("sphere_m"), *extra)
        .where(m.c.geog.op("&&")(expanded), *_filter_clauses(shape))
        .order_by(knn)
        .limit(bindparam("k", value=1, type_=Integer))
        .subquery("nearest")
    )
    stmt = (
        select(
            inner.c.id,
            inner.c.code,
            inner.c.search_lat_deg,
            inner.c.search_lon_deg,
            inner.c.sphere_m,
            *(inner.c[f"x_{name}"] for name in extra_columns),
        )
        .where(func.ST_DWithin(inner.c.geog, point, prefilter, False))
        .order_by(inner.c.sphere_m)
    )
    return _compile(stmt, "postgresql")


@lru_cache(maxsize=256)
def box_candidates_sql(shape: FilterShape, n_lon_ranges: int, vendor: str) -> tuple[str, dict]:
    """Text of the portable box query for ``vendor`` ("sqlite" or "postgresql").

    Parameters to add: ``lat_min``, ``lat_max``, ``lon_min_<i>``, ``lon_max_<i>`` for
    each longitude range ``i`` (none when the box covers all longitudes), plus the
    shape's filter parameters.
    """
    m = mark_table
    lon_ranges = [
        m.c.search_lon_deg.between(
            bindparam(f"lon_min_{i}", value=0.0, type_=Float), bindparam(f"lon_max_{i}", value=0.0, type_=Float)
        )
        for i in range(n_lon_ranges)
    ]
    where: list[ColumnElement[bool]] = [
        m.c.search_lat_deg.between(
            bindparam("lat_min", value=0.0, type_=Float), bindparam("lat_max", value=0.0, type_=Float)
        )
    ]
    if lon_ranges:
        where.append(or_(*lon_ranges) if len(lon_ranges) > 1 else lon_ranges[0])
    else:
        where.append(m.c.search_lon_deg.is_not(None))
    stmt = select(m.c.id, m.c.code, m.c.search_lat_deg, m.c.search_lon_deg).where(*where, *_filter_clauses(shape))
    return _compile(stmt, vendor)


def run_candidates(connection, sql: str, params: dict, *, with_sphere: bool, n_extra: int = 0) -> CandidateRows:
    """Execute candidate SQL on a Django connection and return the rows as arrays."""
    with connection.cursor() as cursor:
        cursor.execute(sql, params)
        rows = cursor.fetchall()
    if not rows:
        empty = np.zeros(0)
        return CandidateRows(
            np.zeros(0, dtype=np.int64), [], empty, empty, empty if with_sphere else None, [] if n_extra else None
        )
    cols = list(zip(*rows, strict=True))
    first_extra = 5 if with_sphere else 4
    return CandidateRows(
        ids=np.asarray(cols[0], dtype=np.int64),
        codes=list(cols[1]),
        lat_deg=np.asarray(cols[2], dtype=float),
        lon_deg=np.asarray(cols[3], dtype=float),
        sphere_m=np.asarray(cols[4], dtype=float) if with_sphere else None,
        extra=[row[first_extra:] for row in rows] if n_extra else None,
    )


def filter_params(shape: FilterShape, *, frame_epsg: int | None, visit_cutoff: dt.date | None, vendor: str) -> dict:
    """Values of the filter parameters a shape uses (dates as ISO text on SQLite)."""
    params: dict = {}
    if shape.frame:
        if frame_epsg is None:
            raise ValueError("this filter shape compares the frame: give frame_epsg")
        params["frame_epsg"] = int(frame_epsg)
    if shape.intact_visit:
        if visit_cutoff is None:
            raise ValueError("this filter shape asks for an intact visit: give visit_cutoff")
        params["visit_cutoff"] = visit_cutoff.isoformat() if vendor == "sqlite" else visit_cutoff
    return params


def normalise_choices(values: str | Sequence[str] | None) -> tuple[str, ...] | None:
    """``None`` stays None; a string or a sequence becomes a sorted tuple of unique values."""
    if values is None:
        return None
    if isinstance(values, str):
        values = [values]
    return tuple(sorted(set(values)))
