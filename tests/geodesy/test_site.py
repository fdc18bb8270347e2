"""Job sites (registry.geodesy.site): parsing, local plane, grid.

Sources beside each check value:
- [geod] pyproj Geod (GRS80), i.e. Karney's geodesic algorithms (J. Geodesy 87, 2013), and
  GeographicLib 2.1 (an independent implementation) for distances and ellipsoidal areas.
- [Snyder] J. P. Snyder, Map Projections — A Working Manual (USGS PP 1395, 1987), eq. 8-7: the
  transverse Mercator scale grows as x²/(2R²), about 4.9e-6 at 20 km from the central meridian.
- [UTM] UTM zones are 6° wide starting at 180° W (from memory), cross-checked with PROJ's CRS database.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic
from pyproj import Geod
from pyproj.aoi import AreaOfInterest
from pyproj.database import query_utm_crs_info

from registry.geodesy.site import (
    LocalPlane,
    SiteError,
    build_site_grid,
    display_utm_zone,
    parse_site_geojson,
    points_in_polygon,
    polygon_area_m2,
    site_plane,
    site_radius_m,
)

GRS80 = Geodesic(6378137.0, 1 / 298.257222101)


def _poly(coords):
    return {"type": "Polygon", "coordinates": coords}


SQUARE = [[[-110.61, 45.19], [-110.59, 45.19], [-110.59, 45.21], [-110.61, 45.21], [-110.61, 45.19]]]


def test_parse_point_polygon_feature_and_text():
    p = parse_site_geojson({"type": "Point", "coordinates": [-110.6, 45.2, 1520.0]})
    assert (p.kind, p.ref_lat_deg, p.ref_lon_deg, p.height_m) == ("point", 45.2, -110.6, 1520.0)
    poly = parse_site_geojson(json.dumps({"type": "Feature", "properties": {}, "geometry": _poly(SQUARE)}))
    assert poly.kind == "polygon"
    # The centroid of a symmetric 0.02° square is (within the projection's asymmetry) its centre.
    assert poly.ref_lon_deg == pytest.approx(-110.6, abs=1e-9)
    assert poly.ref_lat_deg == pytest.approx(45.2, abs=2e-6)


@pytest.mark.parametrize(
    "value, code",
    [
        ("{not json", "invalid_json"),
        ([1, 2], "unsupported_geometry"),
        ({"type": "LineString", "coordinates": [[0, 0], [1, 1]]}, "unsupported_geometry"),
        ({"type": "Feature", "geometry": None}, "unsupported_geometry"),
        ({"type": "Point", "coordinates": [45.2]}, "invalid_position"),
        ({"type": "Point", "coordinates": [-200.0, 45.2]}, "invalid_position"),
        ({"type": "Point", "coordinates": [-110.6, 95.0]}, "invalid_position"),
        ({"type": "Point", "coordinates": ["-110.6", 45.2]}, "invalid_position"),
        ({"type": "Point", "coordinates": [float("nan"), 45.2]}, "invalid_position"),
        (_poly([]), "too_few_positions"),
        (_poly([[[-110.6, 45.2], [-110.5, 45.2], [-110.6, 45.2]]]), "too_few_positions"),
        (_poly([[[-110.6, 45.2], [-110.5, 45.2], [-110.5, 45.3], [-110.6, 45.3]]]), "ring_not_closed"),
        (
            _poly([[[-110.6, 45.2], [-110.5, 45.3], [-110.5, 45.2], [-110.6, 45.35], [-110.6, 45.2]]]),
            "self_intersecting",
        ),
        (_poly([[[-110.6, 45.2], [-110.6, 45.25], [-110.6, 45.3], [-110.6, 45.2]]]), "zero_area"),
        (_poly([[[-111.5, 45.0], [-110.0, 45.0], [-110.0, 45.6], [-111.5, 45.6], [-111.5, 45.0]]]), "site_too_large"),
    ],
)
def test_bad_sites_are_refused_with_a_code(value, code):
    with pytest.raises(SiteError) as info:
        parse_site_geojson(value)
    assert info.value.code == code


def test_planar_distances_against_geodesics_inside_20_km():
    # [Snyder] bound ≈ 4.9e-6 relative at 20 km; [geod] references: pyproj Geod and GeographicLib.
    plane = LocalPlane(45.2, -110.6)
    rng = np.random.default_rng(11)
    lat = 45.2 + rng.uniform(-0.17, 0.17, (400, 2))  # ±19 km north–south
    lon = -110.6 + rng.uniform(-0.24, 0.24, (400, 2))  # ±19 km east–west
    e, n = plane.to_local_m(lat, lon)
    planar = np.hypot(e[:, 0] - e[:, 1], n[:, 0] - n[:, 1])
    _, _, geodesic = Geod(ellps="GRS80").inv(lon[:, 0], lat[:, 0], lon[:, 1], lat[:, 1])
    ok = geodesic > 100
    rel = np.abs(planar[ok] - geodesic[ok]) / geodesic[ok]
    assert rel.max() < 1e-5
    for i in range(0, 400, 40):  # independent implementation
        s12 = GRS80.Inverse(lat[i, 0], lon[i, 0], lat[i, 1], lon[i, 1])["s12"]
        assert planar[i] == pytest.approx(s12, rel=1e-5)


def test_plane_round_trip():
    plane = LocalPlane(45.2, -110.6)
    lat, lon = plane.to_geodetic_deg(*plane.to_local_m(45.31, -110.45))
    assert float(lat) == pytest.approx(45.31, abs=1e-11)
    assert float(lon) == pytest.approx(-110.45, abs=1e-11)


def test_area_against_ellipsoidal_area():
    site = parse_site_geojson(_poly(SQUARE))
    plane = site_plane(site)
    ring = site.rings_lonlat_deg[0]
    rings_m = [np.column_stack(plane.to_local_m(ring[:, 1], ring[:, 0]))]
    planar = polygon_area_m2(rings_m)
    # [geod] the polygon's edges are geodesics there and straight lines here; over 2 km edges the two
    # differ by less than 1e-5 relative in area.
    geodesic_area, _ = Geod(ellps="GRS80").polygon_area_perimeter(ring[:, 0], ring[:, 1])
    assert planar == pytest.approx(abs(geodesic_area), rel=1e-5)


def test_points_in_polygon_with_hole():
    outer = np.array([[0, 0], [10, 0], [10, 10], [0, 10], [0, 0]], dtype=float)
    hole = np.array([[4, 4], [6, 4], [6, 6], [4, 6], [4, 4]], dtype=float)
    e = np.array([1.0, 5.0, 11.0, 9.9, 5.0])
    n = np.array([1.0, 5.0, 5.0, 9.9, 3.0])
    assert points_in_polygon(e, n, [outer, hole]).tolist() == [True, False, False, True, True]
    assert polygon_area_m2([outer, hole]) == 96.0


@pytest.mark.parametrize(
    "coords",
    [
        SQUARE,
        # a thin strip 4 km × 150 m
        [[[-110.63, 45.2], [-110.58, 45.2], [-110.58, 45.20135], [-110.63, 45.20135], [-110.63, 45.2]]],
        # an L shape
        [
            [
                [-110.62, 45.19],
                [-110.58, 45.19],
                [-110.58, 45.20],
                [-110.60, 45.20],
                [-110.60, 45.22],
                [-110.62, 45.22],
                [-110.62, 45.19],
            ]
        ],
        # a small lot, 60 m square
        [[[-110.6, 45.2], [-110.59924, 45.2], [-110.59924, 45.20054], [-110.6, 45.20054], [-110.6, 45.2]]],
    ],
)
def test_auto_grid_has_400_to_2500_cells_and_boundary_samples(coords):
    site = parse_site_geojson(_poly(coords))
    plane = site_plane(site)
    grid = build_site_grid(site, plane)
    assert 400 <= grid.n_cells <= 2500
    # Cell count × cell area approximates the polygon's area (edge cells make the difference;
    # the 150 m strip is only about seven cells wide).
    assert grid.n_cells * grid.spacing_m**2 == pytest.approx(grid.area_m2, rel=0.2)
    # Every vertex is a boundary sample.
    ring = site.rings_lonlat_deg[0]
    ve, vn = plane.to_local_m(ring[:-1, 1], ring[:-1, 0])
    be, bn = grid.e_m[~grid.is_cell], grid.n_m[~grid.is_cell]
    for x, y in zip(ve, vn, strict=True):
        assert np.min(np.hypot(be - x, bn - y)) < 1e-6


def test_fixed_spacing_and_limits():
    site = parse_site_geojson(_poly(SQUARE))
    plane = site_plane(site)
    grid = build_site_grid(site, plane, spacing_m=100.0)
    # 1588 m × 2224 m square (0.02° at 45.2° N) → about 16 × 22 cells of 100 m.
    assert grid.spacing_m == 100.0
    assert 300 <= grid.n_cells <= 400
    with pytest.raises(SiteError) as info:
        build_site_grid(site, plane, spacing_m=1.0)
    assert info.value.code == "grid_too_fine"


def test_point_site_grid_and_radius():
    site = parse_site_geojson({"type": "Point", "coordinates": [-110.6, 45.2]})
    plane = site_plane(site)
    grid = build_site_grid(site, plane)
    assert grid.e_m.tolist() == [0.0] and grid.n_m.tolist() == [0.0] and grid.n_cells == 1
    assert site_radius_m(site, plane) == 0.0
    sq = parse_site_geojson(_poly(SQUARE))
    # Half the diagonal of the 1588 m × 2224 m square ≈ 1366 m [geod: corner to centre].
    assert site_radius_m(sq, site_plane(sq)) == pytest.approx(
        GRS80.Inverse(sq.ref_lat_deg, sq.ref_lon_deg, 45.19, -110.61)["s12"], rel=2e-3
    )


@pytest.mark.parametrize("lon, lat", [(-110.6, 45.2), (-114.01, 45.0), (2.35, 48.85), (174.8, -36.85)])
def test_display_utm_zone(lon, lat):
    zone, north = display_utm_zone(lon, lat)
    infos = query_utm_crs_info(datum_name="WGS 84", area_of_interest=AreaOfInterest(lon, lat, lon, lat))
    names = {i.name for i in infos}
    assert f"WGS 84 / UTM zone {zone}{'N' if north else 'S'}" in names
