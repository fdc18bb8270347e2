"""How the nearby search decides, whichever path found the candidates.

Exact geodesic distances on GRS80 from the search point, the radius applied exactly, the accuracy
filter, nearest first with ties by code; then the found marks as :class:`NearbyMark`, read in one
query (or built from the rows the candidate query already brought).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
from django.db import connection

from registry.geodesy import proximity
from registry.geodesy.accuracy import fgdc_horizontal_95_m
from registry.models import Mark, Position, PositionState
from registry.selectors import spatial_sql
from registry.selectors.fieldwork import latest_findings
from registry.selectors.nearby_filters import Filters
from registry.services.usability import assess

#: Below this distance the azimuth is not meaningful and is reported as None (m).
AZIMUTH_MIN_DISTANCE_M = 0.001


@dataclass(frozen=True)
class NearbyMark:
    """A mark found by a nearby search.

    Attributes
    ----------
    mark : Mark
    distance_m : float
        Geodesic distance on GRS80 from the search point to the mark's search location.
    azimuth_deg : float or None
        Geodetic azimuth (clockwise from north, [0, 360)) at the search point toward the
        mark. None when the distance is under 1 mm.
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


# ----------------------------------------------------------------------------- accuracy


def _accuracy_ok(mark_ids: np.ndarray, filters: Filters) -> np.ndarray:
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


class NearbyList(list):
    """The marks found (a list of :class:`NearbyMark`), with how many marks not for use were passed over."""

    left_out_not_usable: int = 0


# ----------------------------------------------------------------------------- usability


def _usable_ok(mark_ids: np.ndarray, filters: Filters) -> np.ndarray:
    """Which marks are usable (``services.usability.assess`` of status and latest finding)."""
    if not filters.usable_only or mark_ids.size == 0:
        return np.ones(mark_ids.size, dtype=bool)
    ids = [int(i) for i in mark_ids]
    status: dict[int, str] = {}
    for start in range(0, len(ids), 500):  # SQLite limits the number of parameters
        status.update(Mark.objects.filter(pk__in=ids[start : start + 500]).values_list("pk", "status"))
    findings = latest_findings(mark_ids=ids)
    return np.fromiter((assess(status[i], findings.get(i)).usable for i in ids), dtype=bool, count=len(ids))


# ----------------------------------------------------------------------------- deciding


@dataclass
class Decided:
    """Candidates that passed everything, sorted nearest first (ties by code)."""

    ids: np.ndarray
    codes: list[str]
    lat_deg: np.ndarray
    lon_deg: np.ndarray
    distance_m: np.ndarray
    azimuth_deg: np.ndarray
    #: The whole mark row of each, when the candidate query brought it (PostGIS path).
    mark_rows: list[tuple] | None = None
    #: Distances (m) of the marks within the radius left out as not for use (``usable_only``).
    not_usable_m: np.ndarray | None = None

    def __len__(self) -> int:
        return len(self.codes)


def decide(
    rows: spatial_sql.CandidateRows, lat_deg: float, lon_deg: float, radius_m: float, filters: Filters
) -> Decided:
    dist_m, az_deg = proximity.geodesic_inverse(lat_deg, lon_deg, rows.lat_deg, rows.lon_deg)
    keep = np.nonzero(dist_m <= radius_m)[0]
    ids = rows.ids[keep]
    ok = _accuracy_ok(ids, filters)
    keep = keep[ok]
    usable = _usable_ok(rows.ids[keep], filters)
    not_usable_m = dist_m[keep[~usable]]
    keep = keep[usable]
    codes = [rows.codes[i] for i in keep]
    d = dist_m[keep]
    order = np.lexsort((np.asarray(codes, dtype=str), d)) if len(codes) else np.zeros(0, dtype=int)
    return Decided(
        ids=rows.ids[keep][order],
        codes=[codes[i] for i in order],
        lat_deg=rows.lat_deg[keep][order],
        lon_deg=rows.lon_deg[keep][order],
        distance_m=d[order],
        azimuth_deg=az_deg[keep][order],
        mark_rows=None if rows.extra is None else [rows.extra[i] for i in keep[order]],
        not_usable_m=not_usable_m,
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


def mark_columns() -> tuple[str, ...]:
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


def materialise(decided: Decided, limit: int | None) -> NearbyList:
    n = len(decided) if limit is None else min(limit, len(decided))
    ids = [int(i) for i in decided.ids[:n]]
    marks = _marks_by_id(ids) if decided.mark_rows is None else _marks_from_rows(decided.mark_rows[:n])
    out = NearbyList()
    if decided.not_usable_m is not None and decided.not_usable_m.size:
        passed = decided.not_usable_m
        if limit is not None and len(decided) >= limit:  # the limit was reached: those nearer than the last
            passed = passed[passed <= decided.distance_m[n - 1]]
        out.left_out_not_usable = int(passed.size)
    for i in range(n):
        d = float(decided.distance_m[i])
        az = float(decided.azimuth_deg[i])
        hidden = d < AZIMUTH_MIN_DISTANCE_M or not math.isfinite(az)
        out.append(NearbyMark(mark=marks[ids[i]], distance_m=d, azimuth_deg=None if hidden else az))
    return out
