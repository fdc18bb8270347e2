"""Geodetic ↔ ECEF ↔ ENU and covariance rotation (registry.geodesy.conversions).

Sources beside each value: ICSM GDA Technical Manual v2.3, geographic ↔ cartesian example
(secondary transcription), and PROJ 9.5.1 recomputations.
"""

from __future__ import annotations

import numpy as np
import pyproj
import pytest

from registry.geodesy.conversions import (
    GRS80,
    WGS84,
    cov_ecef_to_enu,
    cov_enu_to_ecef,
    ecef_delta_to_enu,
    ecef_to_geodetic,
    enu_delta_to_ecef,
    enu_rotation_matrix,
    geodetic_to_ecef,
    geodetic_to_enu,
)


def dms(d, m, s, negative=False):
    """Sign on the whole angle (common practice)."""
    v = d + m / 60.0 + s / 3600.0
    return -v if negative else v


# ICSM GDA Technical Manual v2.3, geographic ↔ cartesian worked example on GRS80 (secondary transcription).
# Longitudes ...29.52442″ / ...35.38393″ are the cartesian example's (not the geodesic example's).
GDA_POINTS = [
    # name, lat, lon, h (m), X, Y, Z (m) as published
    (
        "Flinders Peak",
        dms(37, 57, 3.72030, True),
        dms(144, 25, 29.52442),
        350.948,
        -4096088.424,
        2929823.084,
        -3901375.454,
    ),
    (
        "Buninyong",
        dms(37, 39, 10.15611, True),
        dms(143, 55, 35.38393),
        749.855,
        -4087103.458,
        2977473.0435,
        -3875464.7525,
    ),
]


@pytest.mark.parametrize("name,lat,lon,h,x,y,z", GDA_POINTS)
def test_gda_worked_example_forward(name, lat, lon, h, x, y, z):
    gx, gy, gz = geodetic_to_ecef(lat, lon, h, ellipsoid=GRS80)
    # Published to the millimetre: tolerance ±1 mm per component.
    assert abs(gx - x) <= 1e-3 and abs(gy - y) <= 1e-3 and abs(gz - z) <= 1e-3, name


@pytest.mark.parametrize("name,lat,lon,h,x,y,z", GDA_POINTS)
def test_gda_worked_example_inverse(name, lat, lon, h, x, y, z):
    glat, glon, gh = ecef_to_geodetic(x, y, z, ellipsoid=GRS80)
    # Our tolerance: φ, λ to 1e-9° (≈ 0.1 mm) and h to 1 mm from the published X, Y, Z.
    assert abs(glat - lat) <= 1e-8  # the published XYZ are rounded to 1 mm → up to ~1e-8° here
    assert abs(glon - lon) <= 1e-8
    assert abs(gh - h) <= 1e-3


def test_against_proj_cart_on_many_points():
    # Reference library: PROJ +proj=cart +ellps=GRS80 (pyproj 3.7.2 / PROJ 9.5.1), an independent implementation.
    rng = np.random.default_rng(20240601)
    lat = rng.uniform(-90, 90, 5000)
    lon = rng.uniform(-180, 180, 5000)
    h = rng.uniform(-500, 9000, 5000)
    cart = pyproj.Transformer.from_pipeline(
        "+proj=pipeline +step +proj=unitconvert +xy_in=deg +xy_out=rad +step +proj=cart +ellps=GRS80"
    )
    px, py, pz = cart.transform(lon, lat, h)
    x, y, z = geodetic_to_ecef(lat, lon, h)
    assert np.max(np.abs(x - px)) < 1e-6 and np.max(np.abs(y - py)) < 1e-6 and np.max(np.abs(z - pz)) < 1e-6
    blat, blon, bh = ecef_to_geodetic(px, py, pz)
    assert np.max(np.abs(blat - lat)) < 1e-11 and np.max(np.abs(bh - h)) < 1e-6


def test_semi_minor_axes():
    # b = a(1 − f), recomputed with PROJ 9.5.1: GRS80 b = 6 356 752.314140 m; WGS84 b = 6 356 752.314245 m.
    assert GRS80.b_m == pytest.approx(6356752.314140, abs=1e-6)
    assert WGS84.b_m == pytest.approx(6356752.314245, abs=1e-6)


@pytest.mark.parametrize(
    "lat,lon,h,x,y,z",
    [
        # WGS84 points, recomputed with PROJ 9.5.1 (+proj=cart)
        (0.0, 0.0, 0.0, 6378137.0, 0.0, 0.0),
        (90.0, 30.0, 0.0, 0.0, 0.0, 6356752.3142),
        (45.0, 45.0, 1000.0, 3194919.1451, 3194919.1451, 4488055.5156),
        (40.5, -73.5, 100.0, 1379437.2884, -4656902.2408, 4120424.8340),
    ],
)
def test_wgs84_closed_form_points(lat, lon, h, x, y, z):
    gx, gy, gz = geodetic_to_ecef(lat, lon, h, ellipsoid=WGS84)
    assert (float(gx), float(gy), float(gz)) == pytest.approx((x, y, z), abs=1e-4)


def test_round_trip_closes_below_a_tenth_of_a_millimetre():
    # Our tolerance: inverse round trip must close to < 0.1 mm for |h| < 10 km.
    rng = np.random.default_rng(7)
    lat = np.concatenate([rng.uniform(-90, 90, 20000), [90.0, -90.0, 0.0, 89.9999999, -89.9999999]])
    lon = np.concatenate([rng.uniform(-180, 180, 20000), [0.0, 10.0, 180.0, -179.0, 45.0]])
    h = np.concatenate([rng.uniform(-1000, 10000, 20000), [0.0, 100.0, -100.0, 9999.0, 0.0]])
    x, y, z = geodetic_to_ecef(lat, lon, h)
    x2, y2, z2 = geodetic_to_ecef(*ecef_to_geodetic(x, y, z))
    err = np.sqrt((x2 - x) ** 2 + (y2 - y) ** 2 + (z2 - z) ** 2)
    assert np.max(err) < 1e-4


def test_poles_and_centre_line():
    lat, lon, h = ecef_to_geodetic(0.0, 0.0, GRS80.b_m + 12.5)
    assert float(lat) == pytest.approx(90.0, abs=1e-12) and float(h) == pytest.approx(12.5, abs=1e-6)
    lat, lon, h = ecef_to_geodetic(0.0, 0.0, -GRS80.b_m)
    assert float(lat) == pytest.approx(-90.0, abs=1e-12) and float(h) == pytest.approx(0.0, abs=1e-6)


def test_enu_rotation_is_orthonormal_and_points_the_right_way():
    rot = enu_rotation_matrix(np.array([45.2, -37.9]), np.array([-110.6, 144.4]))
    assert np.allclose(rot @ np.swapaxes(rot, -1, -2), np.eye(3), atol=1e-15)
    assert np.allclose(np.linalg.det(rot), 1.0)
    # At (0°, 0°): east = +Y, north = +Z, up = +X (definition of the local frame).
    e, n, u = ecef_delta_to_enu(1.0, 2.0, 3.0, 0.0, 0.0)
    assert (float(e), float(n), float(u)) == pytest.approx((2.0, 3.0, 1.0), abs=1e-15)
    back = enu_delta_to_ecef(e, n, u, 0.0, 0.0)
    assert tuple(float(v) for v in back) == pytest.approx((1.0, 2.0, 3.0), abs=1e-15)


def test_enu_against_proj_topocentric():
    # Reference library: PROJ +proj=topocentric (an independent implementation of the local ENU frame).
    lat0, lon0, h0 = 45.2, -110.6, 1500.0
    rng = np.random.default_rng(3)
    lat = lat0 + rng.uniform(-0.2, 0.2, 200)
    lon = lon0 + rng.uniform(-0.2, 0.2, 200)
    h = h0 + rng.uniform(-300, 300, 200)
    x0, y0, z0 = (float(v) for v in geodetic_to_ecef(lat0, lon0, h0))
    topo = pyproj.Transformer.from_pipeline(
        "+proj=pipeline +step +proj=unitconvert +xy_in=deg +xy_out=rad +step +proj=cart +ellps=GRS80 "
        f"+step +proj=topocentric +ellps=GRS80 +X_0={x0} +Y_0={y0} +Z_0={z0}"
    )
    pe, pn, pu = topo.transform(lon, lat, h)
    e, n, u = geodetic_to_enu(lat, lon, h, lat0_deg=lat0, lon0_deg=lon0, h0_m=h0)
    assert np.max(np.abs(e - pe)) < 1e-6 and np.max(np.abs(n - pn)) < 1e-6 and np.max(np.abs(u - pu)) < 1e-6


def test_covariance_rotation_round_trip_and_invariants():
    rng = np.random.default_rng(11)
    a = rng.normal(size=(50, 3, 3)) * 0.01
    cov_enu = a @ np.swapaxes(a, -1, -2)  # symmetric positive semi-definite, m²
    lat = rng.uniform(-80, 80, 50)
    lon = rng.uniform(-180, 180, 50)
    cov_xyz = cov_enu_to_ecef(cov_enu, lat, lon)
    assert np.allclose(cov_ecef_to_enu(cov_xyz, lat, lon), cov_enu, atol=1e-18)
    # A rotation keeps the trace and the eigenvalues.
    assert np.allclose(np.trace(cov_xyz, axis1=-2, axis2=-1), np.trace(cov_enu, axis1=-2, axis2=-1))
    assert np.allclose(np.linalg.eigvalsh(cov_xyz), np.linalg.eigvalsh(cov_enu), atol=1e-15)


def test_vertical_variance_at_origin_becomes_x_variance():
    # At (0°, 0°) up is +X: a 1 cm vertical sigma is a 1 cm X sigma (definition).
    cov_enu = np.diag([0.0, 0.0, 1e-4])
    cov_xyz = cov_enu_to_ecef(cov_enu, 0.0, 0.0)
    assert np.allclose(cov_xyz, np.diag([1e-4, 0.0, 0.0]), atol=1e-20)


def test_written_out_rotations_equal_the_matrix():
    rng = np.random.default_rng(17)
    lat, lon = rng.uniform(-90, 90, 100), rng.uniform(-180, 180, 100)
    d = rng.normal(size=(100, 3))
    rot = enu_rotation_matrix(lat, lon)
    enu = np.stack(ecef_delta_to_enu(d[:, 0], d[:, 1], d[:, 2], lat, lon), axis=-1)
    assert np.allclose(enu, np.einsum("nij,nj->ni", rot, d), atol=1e-14)
    xyz = np.stack(enu_delta_to_ecef(enu[:, 0], enu[:, 1], enu[:, 2], lat, lon), axis=-1)
    assert np.allclose(xyz, d, atol=1e-14)
