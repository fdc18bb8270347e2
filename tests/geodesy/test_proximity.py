"""registry.geodesy.proximity: search boxes, geodesic inverse.

Independent reference: GeographicLib 2.1 (C. F. F. Karney, "Algorithms for geodesics",
J. Geodesy 87 (2013) 43–55), on GRS80 (a = 6 378 137 m, 1/f = 298.257222101; Moritz 1980).
"""

from __future__ import annotations

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic

from registry.geodesy import proximity

GRS80 = Geodesic(6378137.0, 1 / 298.257222101)
WGS84 = Geodesic(6378137.0, 1 / 298.257223563)


def _circle(lat, lon, radius_m, n=360):
    """Points at exactly radius_m from (lat, lon) in n directions (GeographicLib Direct)."""
    pts = [GRS80.Direct(lat, lon, az, radius_m) for az in np.linspace(0.0, 360.0, n, endpoint=False)]
    return np.array([p["lat2"] for p in pts]), np.array([p["lon2"] for p in pts])


@pytest.mark.parametrize(
    "lat, lon, radius_m",
    [
        (45.2, -110.6, 20_000.0),  # fictional district
        (0.0, 0.0, 50_000.0),
        (-17.6, 179.95, 30_000.0),  # box split at the antimeridian
        (-17.6, -180.0, 5_000.0),
        (10.0, 180.0, 5_000.0),
        (89.7, 45.0, 40_000.0),  # reaches the north pole
        (-89.9, -120.0, 5_000.0),
        (75.0, 10.0, 300_000.0),  # large radius at high latitude
        (60.0, -179.0, 900_000.0),
    ],
)
def test_search_box_holds_the_whole_circle_and_is_not_much_larger(lat, lon, radius_m):
    box = proximity.search_box(lat, lon, radius_m)
    for r in (radius_m, radius_m * 0.5, radius_m * 0.999999):
        c_lat, c_lon = _circle(lat, lon, r)
        assert box.contains(c_lat, c_lon).all()
    # Latitude half-width: ρ/(a(1−e²)) exceeds the true ρ/M(φ) by at most M(90°)/M(0°) − 1 = 1.01 %.
    c_lat, _ = _circle(lat, lon, radius_m)
    if not box.all_longitudes:
        true_half_lat = max(c_lat.max() - lat, lat - c_lat.min())
        assert (box.lat_max_deg - lat) <= true_half_lat * 1.0102 + 1e-6


def test_search_box_splits_at_the_antimeridian_and_opens_at_a_pole():
    box = proximity.search_box(-17.6, 179.99, 5000.0)
    assert len(box.lon_ranges_deg) == 2
    (w_lo, w_hi), (e_lo, e_hi) = box.lon_ranges_deg
    assert w_hi == 180.0 and e_lo == -180.0 and -180.0 < e_hi < -179.9 and 179.9 < w_lo < 180.0
    assert box.contains([-17.6, -17.6], [180.0, -180.0]).all()
    assert proximity.search_box(89.99, 10.0, 5000.0).all_longitudes
    assert proximity.search_box(-89.99, 10.0, 5000.0).lat_min_deg == -90.0
    with pytest.raises(ValueError):
        proximity.search_box(45.0, 0.0, float("nan"))


# Karney (2013), J. Geodesy 87:43–55, worked examples (attribution from memory, unconfirmed), recomputed
# with GeographicLib 2.1 on WGS84; converted here to GRS80 by recomputing with GeographicLib, since the two
# ellipsoids differ by 0.1 mm in b.
@pytest.mark.parametrize(
    "lat1, lon1, lat2, lon2, s_wgs84_m, az_wgs84_deg",
    [
        (40.0, 0.0, 41.0, 1.0, 139_698.755393, 37.033299902),
        (-30.12345, 0.0, -30.12344, 0.00005, 4.944208, 77.043533541),
    ],
)
def test_geodesic_inverse_against_published_and_geographiclib(lat1, lon1, lat2, lon2, s_wgs84_m, az_wgs84_deg):
    # Published WGS84 value reproduced by the reference library (sanity of the reference).
    g84 = WGS84.Inverse(lat1, lon1, lat2, lon2)
    assert g84["s12"] == pytest.approx(s_wgs84_m, abs=1e-6)
    assert g84["azi1"] == pytest.approx(az_wgs84_deg, abs=1e-9)
    # Our GRS80 inverse against GeographicLib on GRS80: 1 µm, 1e-9°.
    d, az = proximity.geodesic_inverse(lat1, lon1, lat2, lon2)
    g80 = GRS80.Inverse(lat1, lon1, lat2, lon2)
    assert float(d) == pytest.approx(g80["s12"], abs=1e-6)
    assert float(az) == pytest.approx(g80["azi1"] % 360.0, abs=1e-9)
    # The module docstring's claim: GRS80 and WGS84 distances differ by well under a millimetre.
    assert abs(float(d) - s_wgs84_m) < 1e-4


def test_geodesic_inverse_is_vectorised_and_azimuth_in_0_360():
    d, az = proximity.geodesic_inverse(0.0, 0.0, [0.0, 0.0, -0.001], [0.001, -0.001, 0.0])
    assert d.shape == (3,)
    np.testing.assert_allclose(az, [90.0, 270.0, 180.0], atol=1e-9)


def test_sphere_factors_are_the_radii_of_curvature_over_r1():
    # WGS84: a(1−e²) = 6 335 439.327 m, a/√(1−e²) = 6 399 593.626 m, R1 = (2a+b)/3 = 6 371 008.771 m
    # (NIMA TR8350.2, 3rd ed., table 3.3: b = 6 356 752.3142 m, mean radius R1 = 6 371 008.7714 m;
    # from memory, and recomputed here from a and 1/f).
    lo, hi = proximity.sphere_distance_factors()
    assert lo == pytest.approx(6_335_439.327 / 6_371_008.771, rel=3e-9)  # 1e-9 safety margin inside
    assert hi == pytest.approx(6_399_593.626 / 6_371_008.771, rel=3e-9)
