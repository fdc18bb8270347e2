"""Where the nearby search finds its candidates: PostGIS (KNN and a radius prefilter) or a portable box.

Both widen their search until a ``limit`` is provably complete; both hand their rows to
:func:`registry.selectors.nearby_decide.decide`, so they return the same marks in the same order.
"""

from __future__ import annotations

import math

from django.db import connection

from registry.geodesy import proximity
from registry.selectors import spatial_sql
from registry.selectors.nearby_decide import Decided, decide, mark_columns
from registry.selectors.nearby_filters import Filters

#: First box radius of the portable path when a limit is given (m); it grows as needed.
PORTABLE_START_RADIUS_M = 2_000.0

#: Sphere/ellipsoid factors of the PostGIS spherical measures (see ``proximity``).
_SPHERE_LO, _SPHERE_HI = proximity.sphere_distance_factors()


# ----------------------------------------------------------------------------- candidate paths


def postgis_decided(lat_deg, lon_deg, radius_m, limit, filters: Filters) -> Decided:
    """PostGIS path: KNN candidates, widened until the limit is provably complete."""
    shape = filters.shape
    base = spatial_sql.filter_params(
        shape, frame_epsg=filters.frame_epsg, visit_cutoff=filters.visit_cutoff, vendor="postgresql"
    )
    # Any mark within radius_m on the ellipsoid is within radius_m / lo on the sphere; +1 m for rounding.
    prefilter_m = radius_m / _SPHERE_LO + 1.0
    extra = mark_columns()
    sql, fixed = spatial_sql.postgis_candidates_sql(shape, limit is not None, extra)
    params = {**fixed, **base, "lat": lat_deg, "lon": lon_deg, "prefilter_m": prefilter_m}
    if limit is None:
        rows = spatial_sql.run_candidates(connection, sql, params, with_sphere=True, n_extra=len(extra))
        return decide(rows, lat_deg, lon_deg, radius_m, filters)
    k = max(2 * limit + 16, 64)
    while True:
        rows = spatial_sql.run_candidates(connection, sql, {**params, "k": k}, with_sphere=True, n_extra=len(extra))
        decided = decide(rows, lat_deg, lon_deg, radius_m, filters)
        if len(rows) < k:
            return decided  # every mark inside the prefilter radius was seen
        # Unseen marks are at least as far on the sphere as the farthest row, so at least
        # lo × that on the ellipsoid; stop when the limit-th mark is strictly nearer.
        assert rows.sphere_m is not None  # asked for with_sphere=True
        if len(decided) >= limit and decided.distance_m[limit - 1] < float(rows.sphere_m.max()) * _SPHERE_LO:
            return decided
        k *= 4


def _box_rows(lat_deg, lon_deg, box_radius_m, filters: Filters, vendor: str) -> spatial_sql.CandidateRows:
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


def portable_decided(lat_deg, lon_deg, radius_m, limit, filters: Filters) -> Decided:
    """Portable path: a box on latitude/longitude, widened until the limit is provably complete."""
    vendor = connection.vendor
    if limit is None:
        return decide(_box_rows(lat_deg, lon_deg, radius_m, filters, vendor), lat_deg, lon_deg, radius_m, filters)
    rho_m = min(radius_m, PORTABLE_START_RADIUS_M)
    while True:
        rows = _box_rows(lat_deg, lon_deg, rho_m, filters, vendor)
        decided = decide(rows, lat_deg, lon_deg, rho_m, filters)
        # The box holds every mark within rho, so `limit` marks within rho are the nearest.
        if len(decided) >= limit or rho_m >= radius_m:
            return decided
        # Grow as if marks were spread evenly (area ∝ rho²), at least ×2, at most ×8.
        factor = 8.0 if len(decided) == 0 else min(8.0, max(2.0, math.sqrt(1.5 * limit / len(decided))))
        rho_m = min(radius_m, rho_m * factor)
