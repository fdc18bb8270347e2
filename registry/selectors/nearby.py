"""Nearby marks: which marks lie within a radius of a point.

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
- ``usable_only``: the mark is usable by the one rule of ``registry.services.usability``
  (its status and its latest visit's finding). Applied like every other filter, *before* the
  limit: ``limit=N`` gives the N nearest usable marks whenever that many lie within the radius.
  The answer also counts the marks not for use that were passed over on the way
  (``NearbyList.left_out_not_usable``: those nearer than the farthest mark returned, or all
  within the radius when fewer than the limit were found).

The parts: the input's bounds and filters in :mod:`~registry.selectors.nearby_filters`, the two
candidate paths in :mod:`~registry.selectors.nearby_candidates`, the decision and the found marks in
:mod:`~registry.selectors.nearby_decide`.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Sequence

from registry.selectors.nearby_candidates import portable_decided, postgis_decided
from registry.selectors.nearby_decide import NearbyList, NearbyMark, materialise
from registry.selectors.nearby_filters import (
    MAX_LIMIT,
    MAX_RADIUS_M,
    PATH_AUTO,
    PATH_PORTABLE,
    PATH_POSTGIS,
    PATHS,
    number_in_range,
    parse_filters,
    resolve_path,
)

__all__ = [
    "CAUTIONS",
    "MAX_LIMIT",
    "MAX_RADIUS_M",
    "PATHS",
    "PATH_AUTO",
    "PATH_PORTABLE",
    "PATH_POSTGIS",
    "SEARCH_LOCATION_NOTE",
    "NearbyList",
    "NearbyMark",
    "marks_near",
]

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
    usable_only: bool = False,
) -> NearbyList:
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
    status, stability, intact_visit_within_yr, frame_epsg, accuracy_class_max_m, usable_only
        Filters (module docstring), all applied before the limit.
    as_of : date, optional
        Reference date for ``intact_visit_within_yr`` (default: today, UTC).
    path : {"auto", "postgis", "portable"}
        Candidate search. "auto": PostGIS on PostgreSQL, the portable box elsewhere.

    Returns
    -------
    NearbyList of NearbyMark

    Raises
    ------
    registry.errors.InvalidInput
        With a ``code`` (``out_of_range``, ``invalid_number``, ``invalid_choice``,
        ``postgis_unavailable``); nothing is read.
    """
    lat = number_in_range("lat_deg", lat_deg, lo=-90.0, hi=90.0)
    lon = number_in_range("lon_deg", lon_deg, lo=-180.0, hi=180.0)
    radius = number_in_range("radius_m", radius_m, lo=0.0, hi=MAX_RADIUS_M, lo_open=True)
    n = None if limit is None else int(number_in_range("limit", limit, lo=1, hi=MAX_LIMIT))
    filters = parse_filters(
        status=status,
        stability=stability,
        intact_visit_within_yr=intact_visit_within_yr,
        frame_epsg=frame_epsg,
        accuracy_class_max_m=accuracy_class_max_m,
        as_of=as_of,
        usable_only=usable_only,
    )
    chosen = resolve_path(path)
    finder = postgis_decided if chosen == PATH_POSTGIS else portable_decided
    return materialise(finder(lat, lon, radius, n, filters), n)
