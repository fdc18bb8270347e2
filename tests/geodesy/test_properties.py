"""Property tests (hypothesis): round trips close, and vectorised results equal scalar ones."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from registry.geodesy.conversions import (
    cov_ecef_to_enu,
    cov_enu_to_ecef,
    ecef_to_geodetic,
    geodetic_to_ecef,
)
from registry.geodesy.dms import format_dms, format_lat, format_lon, parse_angle
from registry.geodesy.geodesic import forward, inverse
from registry.geodesy.grid import elevation_factor, from_grid, to_grid

lats = st.floats(min_value=-90.0, max_value=90.0, allow_nan=False)
lons = st.floats(min_value=-180.0, max_value=180.0, allow_nan=False)
heights = st.floats(min_value=-1000.0, max_value=10000.0, allow_nan=False)
district_lat = st.floats(min_value=44.0, max_value=46.5, allow_nan=False)  # zone 12N around the demo district
district_lon = st.floats(min_value=-113.9, max_value=-108.1, allow_nan=False)


@settings(max_examples=300, deadline=None)
@given(lats, lons, heights)
def test_geodetic_ecef_round_trip(lat, lon, h):
    x, y, z = geodetic_to_ecef(lat, lon, h)
    x2, y2, z2 = geodetic_to_ecef(*ecef_to_geodetic(x, y, z))
    assert np.sqrt((x2 - x) ** 2 + (y2 - y) ** 2 + (z2 - z) ** 2) < 1e-4  # < 0.1 mm (our tolerance)


@settings(max_examples=300, deadline=None)
@given(st.floats(min_value=-360.0, max_value=360.0, allow_nan=False), st.integers(min_value=0, max_value=6))
def test_dms_format_parse_round_trip(angle, decimals):
    text = format_dms(angle, decimals=decimals)
    back = parse_angle(text)
    # Rounding to `decimals` of a second: at most half a unit of the last place.
    assert abs(back - angle) * 3600 <= 0.5 * 10.0**-decimals + 1e-9


@settings(max_examples=200, deadline=None)
@given(lats, lons)
def test_hemisphere_forms_round_trip(lat, lon):
    assert parse_angle(format_lat(lat), kind="lat") == pytest.approx(lat, abs=0.5e-5 / 3600 + 1e-12)
    assert parse_angle(format_lon(lon), kind="lon") == pytest.approx(lon, abs=0.5e-5 / 3600 + 1e-12)


@settings(max_examples=100, deadline=None)
@given(st.lists(st.tuples(lats, lons, lats, lons), min_size=1, max_size=20))
def test_geodesic_vectorised_equals_scalar_and_direct_inverts_inverse(rows):
    a = np.array(rows)
    many = inverse(a[:, 0], a[:, 1], a[:, 2], a[:, 3])
    for i, (lat1, lon1, lat2, lon2) in enumerate(rows):
        one = inverse(lat1, lon1, lat2, lon2)
        assert float(one.distance_m) == pytest.approx(many.distance_m[i], rel=1e-15, abs=1e-9)
        assert float(one.azimuth12_deg) == pytest.approx(many.azimuth12_deg[i], rel=1e-14, abs=1e-12)
    f = forward(a[:, 0], a[:, 1], many.azimuth12_deg, many.distance_m)
    back = inverse(f.lat2_deg, f.lon2_deg, a[:, 2], a[:, 3])
    assert np.all(back.distance_m < 1e-6)  # the direct problem lands on point 2 (to a micrometre)


@settings(max_examples=100, deadline=None)
@given(st.lists(st.tuples(district_lat, district_lon, heights), min_size=1, max_size=20))
def test_grid_vectorised_equals_scalar_and_round_trips(rows):
    a = np.array(rows)
    many = to_grid(a[:, 0], a[:, 1], frame_epsg=6319, grid=6341)
    ef_many = elevation_factor(a[:, 2], lat_deg=a[:, 0])
    # Equal to a few units in the last place: numpy's SIMD kernels for arrays and its scalar path may
    # round transcendental functions differently by 1 ulp.
    for i, (lat, lon, h) in enumerate(rows):
        one = to_grid(lat, lon, frame_epsg=6319, grid=6341)
        assert float(one.easting_m) == pytest.approx(many.easting_m[i], rel=1e-15, abs=1e-9)
        assert float(one.scale_factor) == pytest.approx(many.scale_factor[i], rel=4e-16)
        assert float(one.convergence_deg) == pytest.approx(many.convergence_deg[i], rel=1e-14, abs=1e-15)
        assert float(elevation_factor(h, lat_deg=lat)) == pytest.approx(ef_many[i], rel=4e-16)
    lat2, lon2 = from_grid(many.easting_m, many.northing_m, grid=6341, frame_epsg=6319)
    assert np.max(np.abs(lat2 - a[:, 0])) < 1e-10 and np.max(np.abs(lon2 - a[:, 1])) < 1e-10


@settings(max_examples=100, deadline=None)
@given(lats, lons, st.lists(st.floats(min_value=-0.05, max_value=0.05, allow_nan=False), min_size=9, max_size=9))
def test_covariance_rotation_round_trip(lat, lon, entries):
    a = np.array(entries).reshape(3, 3)
    cov = a @ a.T
    back = cov_ecef_to_enu(cov_enu_to_ecef(cov, lat, lon), lat, lon)
    assert np.allclose(back, cov, atol=1e-15)
    assert np.allclose(back, back.T, atol=1e-18)
